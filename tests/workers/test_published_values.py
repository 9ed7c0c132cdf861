"""Published values, reproduced: one test per number, its source in the docstring.

The README's table "Published values, side by side" lists the same numbers with the tool's
values.  Each source names the exact place of the number where it was read (here: the
paper's abstract); "from memory" marks a value recalled and not re-read, because only the
opening of each paper (title, abstract, first paragraphs) could be read here, not its body.
Statistical checks (Hilbert-Schmidt samples) use binomial, chi-square or normal tests at the
level stated.
"""

import itertools

import numpy as np
import pytest
from scipy import stats

from workers.games.causal_bound import causal_bound, causal_tables
from workers.operators.families import lugano_process, ocb_process, quantum_switch
from workers.games.causal_games import Game, get_game
from workers.games.seesaw import process_value, seesaw
from workers.analysis.separability import analyse
from workers.sdp.solvers import SolverOptions

from .hs_samples import TWO_QUBIT_STATES, ginibre_states, partial_transpose, samples

QUBIT_QUTRIT_STATES = (2, 1, 3, 1)    # valid set: the 6 x 6 density matrices
QUBIT_QUQUART_STATES = (2, 1, 4, 1)   # valid set: the 8 x 8 density matrices

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
    (Oreshkov, Costa, Brukner, Nat. Commun. 3, 1092 (2012); the value from memory, its
    abstract states only that the process violates a causal inequality)."""
    assert causal_bound(get_game("ocb_guess")).value == pytest.approx(0.75, abs=1e-9)


def test_ocb_process_game_value():
    """(2 + sqrt 2)/4 = 0.853553: success probability of the OCB process in that game
    (Oreshkov, Costa, Brukner 2012; from memory.  Brukner, arXiv:1404.0721, abstract: the
    violation is bounded below the algebraic maximum for binary observables).  Tool:
    see-saw, 3 starts."""
    p = ocb_process()
    dims = [(q.d_in, q.d_out) for q in p.scenario.parties]
    value = seesaw(p.matrix.real, dims, get_game("ocb_guess"), n_starts=3, seed=11).value
    assert value == pytest.approx((2 + np.sqrt(2)) / 4, abs=1e-6)


def test_gyni_causal_bound():
    """1/2: causal bound of guess-your-neighbour's-input (GYNI), "both guess" here
    (Branciard, Araujo, Feix, Costa, Brukner, NJP 18, 013008 (2016), arXiv:1508.01704; from
    memory: its abstract states two families of causal inequalities, not their bounds)."""
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
    """1: the Lugano process wins that game with certainty (Baumeler, Feix, Wolf 2014,
    arXiv:1403.7333, abstract: "deterministic signaling between three or more parties
    incompatible with any predefined causal order"; the process also in Baumeler & Wolf,
    NJP 18, 013036 (2016)).  Tool: see-saw, 3 starts."""
    p = lugano_process()
    dims = [(q.d_in, q.d_out) for q in p.scenario.parties]
    value = seesaw(p.matrix.real, dims, get_game("lugano_game"), n_starts=3, seed=4).value
    assert value == pytest.approx(1.0, abs=1e-6)


def test_ocb_random_robustness():
    """sqrt 2 - 1 = 0.414214: random robustness of the OCB process (Araujo et al., NJP 17,
    102001 (2015); from memory, uncertain where in the paper; derived analytically in
    workers/THEORY.md §5).  Tool: IPM at eps 1e-9."""
    p = ocb_process()
    res = analyse(p.scenario, p.matrix, ("random",),
                  options=SolverOptions(eps_abs=1e-9, eps_rel=1e-9))
    assert res.robustness("random") == pytest.approx(np.sqrt(2) - 1, abs=1e-6)


def test_two_qubit_hs_separability_probability():
    """8/33 = 0.2424: probability that a Hilbert-Schmidt-random two-qubit state is separable
    (= PPT) (conjectured: Slater, arXiv:0704.3723, abstract; supported by Milz & Strunz,
    J. Phys. A 48, 035306 (2015), as stated in Slater, arXiv:1506.08739, abstract).  Tool: hs_volume on the scenario
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
    (Zyczkowski & Sommers, J. Phys. A 34, 7111 (2001), arXiv:quant-ph/0012101; the formula
    from memory).  Normal test of the mean at level 1e-3, and a two-sample Kolmogorov-Smirnov
    test against purities of Ginibre states G G^dagger / Tr at level 1e-3 (that the HS
    measure is the one induced by the Ginibre ensemble: the same paper, abstract)."""
    W, _ = samples(TWO_QUBIT_STATES)
    purity = np.einsum("kij,kji->k", W, W).real
    z = (purity.mean() - 8 / 17) / (purity.std(ddof=1) / np.sqrt(len(W)))
    assert 2 * stats.norm.sf(abs(z)) > LEVEL
    G = ginibre_states(len(W), 4, seed=8)
    assert stats.ks_2samp(purity, np.einsum("kij,kji->k", G, G).real).pvalue > LEVEL


def _partial_transpose(W: np.ndarray, d_a: int, d_b: int) -> np.ndarray:
    """Partial transpose on the second factor of a stack of (d_a d_b)-dimensional operators."""
    n = W.shape[0]
    return W.reshape(n, d_a, d_b, d_a, d_b).transpose(0, 1, 4, 3, 2).reshape(n, d_a * d_b, -1)


def _ppt(W: np.ndarray, d_a: int, d_b: int) -> np.ndarray:
    return np.linalg.eigvalsh(_partial_transpose(W, d_a, d_b))[:, 0] >= 0


def _bloch_radius(W: np.ndarray, keep: int) -> np.ndarray:
    """Bloch radius sqrt(2 Tr rho_k^2 - 1) of qubit ``keep`` (0 or 1) of two-qubit states."""
    T = W.reshape(-1, 2, 2, 2, 2)
    rho = np.einsum("kajbj->kab", T) if keep == 0 else np.einsum("kjajb->kab", T)
    return np.sqrt(np.clip(2 * np.einsum("kab,kba->k", rho, rho).real - 1, 0, None))


def _assert_constant_by_tertile(flag: np.ndarray, r: np.ndarray, p: float) -> None:
    """The fraction of ``flag`` is the same in the three tertiles of r (chi-square test of the
    2 x 3 table) and equals p in each (binomial tests), all at level LEVEL."""
    bins = np.searchsorted(np.quantile(r, [1 / 3, 2 / 3]), r)
    counts = np.array([[np.sum(flag & (bins == b)), np.sum(~flag & (bins == b))]
                       for b in range(3)])
    assert stats.chi2_contingency(counts).pvalue > LEVEL
    for hits, total in zip(counts[:, 0], counts.sum(axis=1)):
        assert stats.binomtest(int(hits), int(total), p).pvalue > LEVEL


def test_two_qubit_separability_probability_does_not_depend_on_the_reduced_state():
    """8/33 along the Bloch radius r of either one-qubit marginal: the HS separability
    probability of two-qubit states with a fixed marginal does not depend on it (Milz &
    Strunz, J. Phys. A 48, 035306 (2015), arXiv:1408.3666, abstract; restated with 8/33 by
    Slater, arXiv:1506.08739, abstract).  Tool: hs_volume samples (2,1,2,1), split into
    tertiles of r for each marginal: chi-square test of equal PPT fractions (2 x 3 table) and
    a binomial test against 8/33 in every tertile, all at level 1e-3."""
    W, _ = samples(TWO_QUBIT_STATES)
    sep = _ppt(W, 2, 2)
    for keep in (0, 1):
        _assert_constant_by_tertile(sep, _bloch_radius(W, keep), 8 / 33)


def test_determinant_split_does_not_depend_on_the_reduced_state():
    """4/33 along the Bloch radius: the part of the separability probability with
    det(rho^PT) > det(rho) keeps the r-invariance of the whole (Slater, arXiv:1506.08739,
    abstract; its value 4/33 from Slater & Dunkl, arXiv:1404.1860, abstract).  Tool: tertiles
    of the first marginal's r, chi-square test of equal fractions and binomial test against
    4/33 in every tertile, level 1e-3."""
    W, _ = samples(TWO_QUBIT_STATES)
    pt = _partial_transpose(W, 2, 2)
    part = (np.linalg.eigvalsh(pt)[:, 0] >= 0) & (np.linalg.det(pt).real > np.linalg.det(W).real)
    _assert_constant_by_tertile(part, _bloch_radius(W, 0), 4 / 33)


def test_qubit_qutrit_hs_separability_probability():
    """27/1000 = 0.027: HS separability probability of qubit-qutrit states, conjectured and
    "strongly supported" (Slater, arXiv:1901.09889, abstract).  For 2 x 3, PPT is equivalent
    to separability (Horodecki criterion; common practice).  Tool: hs_volume on dims
    (2,1,3,1) (valid set = the 6 x 6 density matrices), 1000 samples (about 9 s), 24
    billiard steps, root seed 17; binomial test at level 1e-3."""
    W, _ = samples(QUBIT_QUTRIT_STATES, n=1000)
    assert stats.binomtest(int(np.sum(_ppt(W, 2, 3))), len(W), 27 / 1000).pvalue > LEVEL


@pytest.mark.slow
def test_qubit_ququart_hs_ppt_probability():
    """16/12375 = 0.001293: conjectured HS probability that a qubit-ququart (2 x 4) state has
    a positive partial transpose (Slater, arXiv:1901.09889, abstract).  Tool: hs_volume on
    dims (2,1,4,1), 20,000 samples, 24 billiard steps, root seed 17; binomial test at level
    1e-3.  Slow (about 5 minutes on this 2-core machine)."""
    W, _ = samples(QUBIT_QUQUART_STATES, n=20_000)
    assert stats.binomtest(int(np.sum(_ppt(W, 2, 4))), len(W), 16 / 12375).pvalue > LEVEL


@pytest.mark.slow
def test_quantum_switch_is_causally_nonseparable():
    """The quantum switch is causally nonseparable ("a genuine example of indefinite causal
    order", Araujo et al., NJP 17, 102001 (2015), arXiv:1506.03776, abstract).  The paper's
    robustness values are not quoted: its body could not be read here.  Tool: random
    robustness of quantum_switch(d=2): verdict nonseparable, and the dual's witness has
    Tr(S W) < 0 (the tool's R_r is 5.910369).  Slow (about 20 s)."""
    p = quantum_switch()
    res = analyse(p.scenario, p.matrix, ("random",))
    assert res.verdict == "nonseparable"
    assert res.witness_result().witness_value < 0
