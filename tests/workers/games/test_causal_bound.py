"""Tests for workers.games.causal_bound: enumeration of deterministic causal strategies and the
LP."""

from __future__ import annotations

import itertools

import numpy as np
import pytest

from workers.games.causal_bound import causal_bound, causal_tables, table_scores
from workers.games.causal_games import Game, get_game


def _depends_only_on_own(outputs: np.ndarray, k: int) -> np.ndarray:
    """Per table: does party k's output (axis -1 index k) ignore every other input?"""
    own = np.moveaxis(outputs[..., k], 1 + k, 1)
    flat = own.reshape(own.shape[0], own.shape[1], -1)
    return np.all(flat == flat[:, :, :1], axis=(1, 2))


def _is_causal_bipartite(outputs: np.ndarray) -> np.ndarray:
    """Bipartite deterministic causality: one party's output ignores the other's input."""
    return _depends_only_on_own(outputs, 0) | _depends_only_on_own(outputs, 1)


def _per_party(tables: np.ndarray, n_outputs: tuple[int, ...]) -> np.ndarray:
    return np.stack(np.unravel_index(tables, n_outputs), axis=-1)


def test_bipartite_binary_count_by_brute_force() -> None:
    """112 deterministic causal strategies (workers/THEORY.md §7; Branciard et al. NJP 18, 013008).

    Independent reference: all 4**4 = 256 deterministic tables filtered by the bipartite
    definition (a ignores y, or b ignores x) must give the same set.
    """
    tables = causal_tables((2, 2), (2, 2))
    assert len(tables) == 112
    every = np.array(list(itertools.product(range(4), repeat=4))).reshape(-1, 2, 2)
    causal = every[_is_causal_bipartite(_per_party(every, (2, 2)))]
    as_set = {t.tobytes() for t in tables.astype(np.int64)}
    assert as_set == {t.tobytes() for t in causal.astype(np.int64)}


def test_tripartite_binary_count_and_definition() -> None:
    """138,304 deterministic causal strategies, tripartite binary (workers/THEORY.md §7).

    Each table is checked against the recursive definition: some party k ignores the others'
    inputs and, for each x_k, the remaining pair is bipartite causal (Abbott et al., PRA 94,
    032131 (2016), definition of deterministic causal correlations).
    """
    tables = causal_tables((2, 2, 2), (2, 2, 2))
    assert len(tables) == 138_304
    assert len(np.unique(tables.reshape(len(tables), -1), axis=0)) == len(tables)
    outputs = _per_party(tables, (2, 2, 2))
    ok = np.zeros(len(tables), dtype=bool)
    for k in range(3):
        rest = [j for j in range(3) if j != k]
        branch_ok = _depends_only_on_own(outputs, k)
        for value in range(2):
            sub = np.take(outputs, value, axis=1 + k)[..., rest]
            branch_ok &= _is_causal_bipartite(sub)
        ok |= branch_ok
    assert ok.all()


@pytest.mark.parametrize("n_inputs, n_outputs, dim", [((2, 2), (2, 2), 12),
                                                      ((2, 2, 2), (2, 2, 2), 56)])
def test_affine_dimension(n_inputs, n_outputs, dim) -> None:
    """Affine dimension 12 (bipartite) and 56 (tripartite) (workers/THEORY.md §7).

    Also the dimension of the normalised-behaviour space, prod|X| (prod|A| - 1) (identity).
    """
    tables = causal_tables(n_inputs, n_outputs)
    n_joint = int(np.prod(n_outputs))
    flat = tables.reshape(len(tables), -1)
    vertices = np.zeros((len(tables), n_joint * flat.shape[1]))
    rows = np.repeat(np.arange(len(tables)), flat.shape[1])
    cols = (flat * flat.shape[1] + np.arange(flat.shape[1])).ravel()
    vertices[rows, cols] = 1.0
    diffs = vertices[1:] - vertices[0]
    assert np.linalg.matrix_rank(diffs.T @ diffs) == dim == flat.shape[1] * (n_joint - 1)


@pytest.mark.parametrize("name, bound", [("ocb_guess", 0.75), ("both_guess", 0.5),
                                         ("lugano_game", 0.75)])
def test_published_causal_bounds(name: str, bound: float) -> None:
    """ocb_guess 3/4 (OCB, Nat. Commun. 3, 1092 (2012)); both_guess 1/2 (Branciard et al.
    2016); lugano_game 3/4 (workers/THEORY.md §7, by LP)."""
    game = get_game(name)
    result = causal_bound(game)
    assert result.value == pytest.approx(bound, abs=1e-9)
    assert "Optimal" in result.lp_status
    behaviour = _behaviour_of(result.strategy.outputs, game)
    assert game.value(behaviour) == pytest.approx(bound, abs=1e-12)


def _behaviour_of(outputs: np.ndarray, game: Game) -> np.ndarray:
    """0/1 behaviour p[a..., x...] of per-party outputs[x..., k] (independent of the module)."""
    p = np.zeros(game.n_outputs + game.n_inputs)
    for x in np.ndindex(*game.n_inputs):
        p[tuple(outputs[x]) + x] = 1.0
    return p


def test_lp_matches_vertex_maximum_on_random_coefficients() -> None:
    """For a random coefficient table the LP optimum equals the best vertex score, and every
    vertex score equals a direct evaluation of the behaviour (identity: a linear objective is
    maximised at a vertex)."""
    rng = np.random.default_rng(2024)
    game = Game.from_coefficients("rand", ("A", "B"), rng.normal(size=(2, 3, 3, 2)), (2, 3))
    result = causal_bound(game)
    tables = causal_tables(game.n_inputs, game.n_outputs)
    scores = table_scores(tables, game.coefficients)
    assert result.value == pytest.approx(scores.max(), abs=1e-9)
    for i in rng.choice(len(tables), size=20, replace=False):
        outputs = np.stack(np.unravel_index(tables[i], game.n_outputs), axis=-1)
        assert scores[i] == pytest.approx(game.value(_behaviour_of(outputs, game)))


def test_bound_invariant_under_relabelling_parties() -> None:
    """Swapping the parties of the Lugano game cyclically leaves the bound at 3/4 (property)."""
    game = get_game("lugano_game")
    perm = (1, 2, 0)
    axes = perm + tuple(3 + p for p in perm)
    moved = Game("perm", tuple(game.parties[p] for p in perm), game.n_inputs, game.n_outputs,
                 np.transpose(game.prior, perm), np.transpose(game.payoff, axes))
    assert causal_bound(moved).value == pytest.approx(causal_bound(game).value, abs=1e-9)


def test_strategy_description_reads_as_an_order() -> None:
    """The description names a first party and a response on each branch (common practice)."""
    result = causal_bound(get_game("lugano_game"))
    lines = result.strategy.description.splitlines()
    assert "acts first" in lines[0]
    assert sum("acts next" in line for line in lines) == 6


def test_too_large_scenario_is_refused() -> None:
    """Bad input: an enumeration too large for memory gives a one-line ValueError."""
    with pytest.raises(ValueError, match=r"n_inputs=\(4, 4, 4\)"):
        causal_tables((4, 4, 4), (4, 4, 4))
