"""Tests for workers.games.causal_games: built-in games, registry, validation."""

from __future__ import annotations

import itertools

import numpy as np
import pytest

from workers.games.causal_games import Game, get_game, list_games


def test_registry_lists_the_three_games() -> None:
    """The registry holds the games named in workers/THEORY.md §7 (common practice: registry)."""
    assert list_games() == ["both_guess", "lugano_game", "ocb_guess"]
    for name in list_games():
        assert get_game(name).name == name


def test_unknown_game_error_lists_known_names() -> None:
    """Bad input gives a one-line error that echoes the value and lists the names."""
    with pytest.raises(ValueError, match=r"game='nope'.*both_guess, lugano_game, ocb_guess"):
        get_game("nope")


def test_ocb_guess_rules_by_enumeration() -> None:
    """OCB 2012 game: y = 2*b + b'; win iff (b'=0, Bob's guess = x) or (b'=1, a = b).

    Source: Oreshkov, Costa, Brukner, Nat. Commun. 3, 1092 (2012); checked entry by entry
    against the rule written out here independently of the module.
    """
    game = get_game("ocb_guess")
    assert game.n_inputs == (2, 4) and game.n_outputs == (2, 2)
    np.testing.assert_allclose(game.prior, np.full((2, 4), 1 / 8))
    for a, g, x, b, b2 in itertools.product(range(2), repeat=5):
        expected = (g == x) if b2 == 0 else (a == b)
        assert game.payoff[a, g, x, 2 * b + b2] == float(expected)


def test_both_guess_and_lugano_rules() -> None:
    """Branciard et al., NJP 18, 013008 (2016) (both guess); workers/THEORY.md §7 (Lugano game)."""
    both = get_game("both_guess")
    assert both.payoff.sum() == 4  # exactly one winning output pair per input pair
    assert both.payoff[1, 0, 0, 1] == 1 and both.payoff[0, 1, 0, 1] == 0
    lug = get_game("lugano_game")
    for x, y, z in itertools.product(range(2), repeat=3):
        wins = np.argwhere(lug.payoff[..., x, y, z] == 1)
        assert wins.tolist() == [[(1 - y) & z, (1 - z) & x, (1 - x) & y]]


def test_value_of_uniform_noise_behaviour() -> None:
    """Uniformly random outputs win 'both guess' with probability 1/4 (direct count)."""
    game = get_game("both_guess")
    assert game.value(np.full(game.payoff.shape, 1 / 4)) == pytest.approx(0.25)


def test_from_coefficients_round_trip() -> None:
    """A coefficient table is returned unchanged by .coefficients (identity of the definition)."""
    rng = np.random.default_rng(7)
    table = rng.normal(size=(2, 2, 2, 3))
    game = Game.from_coefficients("random", ("A", "B"), table, n_outputs=(2, 2))
    assert game.n_inputs == (2, 3)
    np.testing.assert_allclose(game.coefficients, table)


def test_validation_messages() -> None:
    """Shape and distribution errors name the field and echo the value."""
    with pytest.raises(ValueError, match="prior has shape"):
        Game("g", ("A",), (2,), (2,), np.ones(3) / 3, np.zeros((2, 2)))
    with pytest.raises(ValueError, match="payoff has shape"):
        Game("g", ("A",), (2,), (2,), np.ones(2) / 2, np.zeros((2, 3)))
    with pytest.raises(ValueError, match="prior sums to"):
        Game("g", ("A",), (2,), (2,), np.ones(2), np.zeros((2, 2)))
    with pytest.raises(ValueError, match="n_inputs="):
        Game("g", ("A", "B"), (2,), (2, 2), np.ones(2) / 2, np.zeros((2, 2, 2)))
    with pytest.raises(ValueError, match="behaviour has shape"):
        get_game("both_guess").value(np.zeros((2, 2)))


def test_arrays_are_read_only() -> None:
    """The frozen dataclass also freezes its tables (common practice)."""
    game = get_game("ocb_guess")
    with pytest.raises(ValueError):
        game.payoff[0, 0, 0, 0] = 5.0
