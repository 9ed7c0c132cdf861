"""Published values, reproduced: one test per number, its source in the docstring.

The README's table "Published values, side by side" lists the same numbers with the tool's
values.  "From memory" marks a value recalled rather than re-read in the source; "abstract"
marks one read in the paper's abstract.  Statistical checks (Hilbert-Schmidt samples) use a
binomial or normal test at the level stated.
"""

import itertools

import numpy as np
import pytest
from scipy import stats

from workers.games.causal_bound import causal_bound, causal_tables
from workers.operators.families import lugano_process, ocb_process
from workers.games.causal_games import Game, get_game
from workers.games.seesaw import process_value, seesaw
from workers.analysis.separability import analyse
from workers.sdp.solvers import SolverOptions

from .hs_samples import TWO_QUBIT_STATES, ginibre_states, partial_transpose, samples

LEVEL = 1e-3          # two-sided level of the statistical checks


def _lgyni() -> Game:
    """Lazy guess-your-neighbour's-input: uniform bits x, y; win iff x(a xor y) = 0 and
    y(b xor x) = 0 (Branciard et al., NJP 18, 013008 (2016))."""
    table = np.zeros((2, 2, 2, 2))
    for a, b, x, y in itertools.product(range(2), repeat=4):
        table[a, b, x, y] = float(x * (a ^ y) == 0 and y * (b ^ x) == 0)
    return Game("lgyni", ("A", "B"), (2, 2), (2, 2), np.full((2, 2), 0.25), table)


def test_ocb_game_causal_bound():
    """3/4: causal bound of the guess-your-partner's-bit game with a choice bit
    (Oreshkov, Costa, Brukner, Nat. Commun. 3, 1092 (2012), main text; from memory)."""
    assert causal_bound(get_game("ocb_guess")).value == pytest.approx(0.75, abs=1e-9)


def test_ocb_process_game_value():
    """(2 + sqrt 2)/4 = 0.853553: success probability of the OCB process in that game
    (Oreshkov, Costa, Brukner 2012, main text; from memory).  Tool: see-saw, 3 starts."""
    p = ocb_process()
    dims = [(q.d_in, q.d_out) for q in p.scenario.parties]
    value = seesaw(p.matrix.real, dims, get_game("ocb_guess"), n_starts=3, seed=11).value
    assert value == pytest.approx((2 + np.sqrt(2)) / 4, abs=1e-6)


def test_gyni_causal_bound():
    """1/2: causal bound of guess-your-neighbour's-input (GYNI), "both guess" here
    (Branciard, Araujo, Feix, Costa, Brukner, NJP 18, 013008 (2016), GYNI inequality; from
    memory)."""
    assert causal_bound(get_game("both_guess")).value == pytest.approx(0.5, abs=1e-9)


def test_lgyni_causal_bound():
    """3/4: causal bound of the lazy GYNI inequality (Branciard et al. 2016, LGYNI; from
    memory)."""
    assert causal_bound(_lgyni()).value == pytest.approx(0.75, abs=1e-9)


def test_bipartite_causal_polytope_vertices():
    """112: vertices (deterministic causal strategies) of the bipartite causal polytope with
    binary inputs and outputs (Branciard et al. 2016, characterisation of the polytope; from
    memory)."""
    assert len(causal_tables((2, 2), (2, 2))) == 112


def test_tripartite_causal_polytope_vertices():
    """138,304: vertices of the tripartite binary causal polytope (Abbott, Giarmatzi, Costa,
    Branciard, PRA 94, 032131 (2016); from memory)."""
    assert len(causal_tables((2, 2, 2), (2, 2, 2))) == 138_304


def test_lugano_game_causal_bound():
    """3/4: causal bound of the tripartite game a = not(y) and z, b = not(z) and x,
    c = not(x) and y (Baumeler, Feix, Wolf, PRA 90, 042106 (2014); from memory)."""
    assert causal_bound(get_game("lugano_game")).value == pytest.approx(0.75, abs=1e-9)


def test_lugano_process_wins_with_certainty():
    """1: the Lugano process wins that game with certainty (Baumeler & Wolf, NJP 18, 013036
    (2016); from memory).  Tool: see-saw, 3 starts."""
    p = lugano_process()
    dims = [(q.d_in, q.d_out) for q in p.scenario.parties]
    value = seesaw(p.matrix.real, dims, get_game("lugano_game"), n_starts=3, seed=4).value
    assert value == pytest.approx(1.0, abs=1e-6)


def test_ocb_random_robustness():
    """sqrt 2 - 1 = 0.414214: random robustness of the OCB process (Araujo et al., NJP 17,
    102001 (2015), OCB example; from memory, uncertain).  Tool: IPM at eps 1e-9."""
    p = ocb_process()
    res = analyse(p.scenario, p.matrix, ("random",),
                  options=SolverOptions(eps_abs=1e-9, eps_rel=1e-9))
    assert res.robustness("random") == pytest.approx(np.sqrt(2) - 1, abs=1e-6)


def test_two_qubit_hs_separability_probability():
    """8/33 = 0.2424: probability that a Hilbert-Schmidt-random two-qubit state is separable
    (= PPT) (Slater, arXiv:0704.3723, abstract; supported by Milz & Strunz, J. Phys. A 48,
    035306 (2015), see Slater arXiv:1506.08739, abstract).  Tool: hs_volume on the scenario
    whose valid set is the two-qubit states; binomial test at level 1e-3."""
    W, _ = samples(TWO_QUBIT_STATES)
    ppt = int(np.sum(np.linalg.eigvalsh(partial_transpose(W))[:, 0] >= 0))
    assert stats.binomtest(ppt, len(W), 8 / 33).pvalue > LEVEL


def test_two_qubit_hs_separable_half_from_determinant_inequality():
    """4/33: probability of a separable two-qubit state with det(rho^PT) > det(rho), half of
    8/33 (Slater & Dunkl, arXiv:1404.1860, abstract).  Binomial test at level 1e-3."""
    W, _ = samples(TWO_QUBIT_STATES)
    pt = partial_transpose(W)
    sep = np.linalg.eigvalsh(pt)[:, 0] >= 0
    bigger = np.linalg.det(pt).real > np.linalg.det(W).real
    assert stats.binomtest(int(np.sum(sep & bigger)), len(W), 4 / 33).pvalue > LEVEL


def test_hs_mean_purity_of_two_qubit_states():
    """8/17 = 0.4706: mean purity Tr rho^2 = 2N/(N^2+1) of HS-random states, N = 4
    (Zyczkowski & Sommers, J. Phys. A 34, 7111 (2001); from memory).  Normal test of the mean
    at level 1e-3, and a two-sample Kolmogorov-Smirnov test against purities of Ginibre states
    G G^dagger / Tr (the same paper's construction of the HS measure) at level 1e-3."""
    W, _ = samples(TWO_QUBIT_STATES)
    purity = np.einsum("kij,kji->k", W, W).real
    z = (purity.mean() - 8 / 17) / (purity.std(ddof=1) / np.sqrt(len(W)))
    assert 2 * stats.norm.sf(abs(z)) > LEVEL
    G = ginibre_states(len(W), 4, seed=8)
    assert stats.ks_2samp(purity, np.einsum("kij,kji->k", G, G).real).pvalue > LEVEL
