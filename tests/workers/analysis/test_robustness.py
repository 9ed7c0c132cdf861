"""Random and generalised robustness: published values, witnesses, invariances, solvers."""

import itertools

import numpy as np
import pytest

from tests.conftest import random_valid_process
from workers.operators.families import lugano_process, ocb_process, random_comb, white_noise_mixture
from workers.analysis.robustness import RobustnessProblem, get_problem
from workers.operators.scenario import Scenario, permute_operator
from workers.sdp.solvers import SolverOptions
from workers.operators.validity import white_noise

OPTS = SolverOptions()
SQ2 = np.sqrt(2)


def test_ocb_random_robustness():
    """R_r(OCB) = sqrt2 - 1 (workers/THEORY.md §5, from |alpha| + |beta| <= 1; process from
    Oreshkov, Costa, Brukner 2012; measure from Araujo et al., NJP 17, 102001 (2015))."""
    p = ocb_process()
    r = get_problem(p.scenario, "random", "exact", OPTS).solve(p.matrix)
    assert r.status == "optimal"
    assert r.value == pytest.approx(SQ2 - 1, abs=1e-6)


def test_ocb_generalized_robustness():
    """R_g(OCB) = 3 - 2 sqrt2 (workers/THEORY.md §5)."""
    p = ocb_process()
    r = get_problem(p.scenario, "generalized", "exact", OPTS).solve(p.matrix)
    assert r.value == pytest.approx(3 - 2 * SQ2, abs=1e-6)


def test_ocb_witness():
    """The dual gives S with Tr(S W) < 0, Tr(S W) = -R_r and Tr(S 1°) = 1 (Araujo et al.
    2015, the random-robustness SDP dual); its leaf duals Y_j are PSD and the primal leaves
    are PSD and sum to W + R_r 1°."""
    p = ocb_process()
    r = get_problem(p.scenario, "random", "exact", OPTS).solve(p.matrix, keep_certificate=True)
    S, noise = r.witness, white_noise(p.scenario)
    assert np.trace(S @ p.matrix).real < 0
    assert np.trace(S @ p.matrix).real == pytest.approx(-(SQ2 - 1), abs=1e-6)
    assert r.witness_value == pytest.approx(-r.value, abs=1e-6)
    assert np.trace(S @ noise).real == pytest.approx(1, abs=1e-6)
    assert min(np.linalg.eigvalsh(Y)[0] for Y in r.dual_blocks) > -1e-7
    assert min(np.linalg.eigvalsh(L)[0] for L in r.leaves) > -1e-7
    assert np.allclose(sum(r.leaves), p.matrix + r.upper_bound * noise, atol=1e-6)


def test_ocb_witness_is_nonnegative_on_combs(rng):
    """Tr(S W_sep) >= 0 for causally separable W (definition of a causal witness)."""
    p = ocb_process()
    r = get_problem(p.scenario, "random", "exact", OPTS).solve(p.matrix)
    for order in [(0, 1), (1, 0)] * 5:
        W = random_comb(p.scenario, order, rng)
        assert np.trace(r.witness @ W).real > -1e-7


def test_white_noise_has_zero_robustness():
    """1° is separable: R_r = R_g = 0 (workers/THEORY.md §5)."""
    s = Scenario.from_dims([2, 2, 3, 2])
    for kind in ("random", "generalized"):
        r = get_problem(s, kind, "exact", OPTS).solve(white_noise(s))
        assert r.value == pytest.approx(0, abs=1e-7)


def test_noise_threshold_of_ocb():
    """p W_OCB + (1-p) 1° is separable iff p <= 1/sqrt2 (workers/THEORY.md §5): its robustness is
    (1 + R_r) p - 1 in closed form, i.e. p sqrt2 - 1 above the threshold."""
    p = ocb_process()
    prob = get_problem(p.scenario, "random", "exact", OPTS)
    for w in (0.5, 1 / SQ2, 0.8, 0.95):
        r = prob.solve(white_noise_mixture(p.scenario, p.matrix, w))
        assert r.value == pytest.approx(max(w * SQ2 - 1, 0.0), abs=1e-6)


def test_combs_and_mixtures_have_zero_robustness(rng):
    """Causally ordered combs and their mixtures are separable (workers/THEORY.md §6)."""
    s = Scenario.from_dims([2, 2, 2, 2])
    prob = get_problem(s, "random", "exact", OPTS)
    combs = [random_comb(s, o, rng) for o in [(0, 1), (1, 0)] * 3]
    for W in combs + [0.3 * combs[0] + 0.7 * combs[1]]:
        assert prob.solve(W).value == pytest.approx(0, abs=1e-6)


def test_tripartite_combs_separable(rng):
    """Tripartite combs of all 6 orders, and a mixture, are separable (workers/THEORY.md §6)."""
    s = Scenario.from_dims([2, 2, 2, 2, 2, 2])
    prob = get_problem(s, "random", "exact", SolverOptions(eps_abs=1e-7, eps_rel=1e-7))
    combs = [random_comb(s, o, rng) for o in itertools.permutations(range(3))]
    for W in [combs[0], combs[3], sum(combs) / 6]:
        assert prob.solve(W).value == pytest.approx(0, abs=1e-5)


def test_party_permutation_invariance(rng):
    """Relabelling the parties (permuting W's factors with them) leaves every robustness
    unchanged (common practice: the definitions are symmetric in the parties)."""
    s = Scenario.from_dims([2, 2, 3, 2])
    W = random_valid_process(s, rng, 1.0)
    s2 = s.permuted([1, 0])
    W2 = permute_operator(s, W, [1, 0])
    for kind in ("random", "generalized"):
        a = get_problem(s, kind, "exact", OPTS).solve(W).value
        b = get_problem(s2, kind, "exact", OPTS).solve(W2).value
        assert a == pytest.approx(b, abs=1e-6)


def test_lugano_permutation_invariance():
    """Cyclic relabelling of the Lugano process (Baumeler & Wolf 2016) keeps R_r."""
    p = lugano_process()
    o = SolverOptions(eps_abs=1e-7, eps_rel=1e-7)
    a = get_problem(p.scenario, "random", "exact", o).solve(p.matrix).value
    s2 = p.scenario.permuted([2, 0, 1])
    b = get_problem(s2, "random", "exact", o).solve(permute_operator(p.scenario, p.matrix,
                                                                     [2, 0, 1])).value
    assert a > 0.1 and a == pytest.approx(b, abs=1e-5)


def test_scs_and_clarabel_agree(rng):
    """Two independent solvers (first-order SCS, interior-point Clarabel) agree to their
    stated tolerances on a seeded sample of random valid bipartite processes."""
    s = Scenario.from_dims([2, 2, 2, 2])
    scs = RobustnessProblem(s, "random", "exact", SolverOptions(solver="SCS"))
    cla = RobustnessProblem(s, "random", "exact", SolverOptions(solver="CLARABEL"))
    for _ in range(8):
        W = random_valid_process(s, rng, 1.0)
        a, b = scs.solve(W), cla.solve(W)
        assert a.ok and b.ok
        assert a.upper_bound == pytest.approx(b.upper_bound, abs=1e-6)


def test_invalid_operator_refused():
    p = ocb_process()
    bad = p.matrix + 0.1 * np.kron(np.kron(np.eye(2), np.diag([1, -1])), np.eye(4))
    with pytest.raises(ValueError, match="not in the valid subspace"):
        get_problem(p.scenario, "random", "exact", OPTS).solve(bad)


def test_solver_failure_is_a_status_with_fallback():
    """A solve cut off by its iteration cap is a status, not an exception; with fallback on,
    the other back-end is tried and the result says so."""
    p = ocb_process()
    capped = SolverOptions(solver="CLARABEL", max_iters=1, fallback=False)
    r = RobustnessProblem(p.scenario, "generalized", "exact", capped).solve(p.matrix)
    assert r.status == "iteration_limit" and r.fallback_from == ""
    again = RobustnessProblem(p.scenario, "generalized", "exact",
                              SolverOptions(solver="CLARABEL", max_iters=1)).solve(p.matrix)
    assert again.fallback_from == "CLARABEL:iteration_limit" and again.solver == "SCS"
    assert again.value == pytest.approx(3 - 2 * SQ2, abs=1e-6)


def test_clarabel_refuses_blocks_that_would_not_fit(monkeypatch):
    """Clarabel's dense PSD scalings of the quantum switch's two 256 x 256 blocks need
    ~276 GB: a failed allocation there aborts the process, so the back-end reports an error
    status instead, and with SCS's capped iterate in hand the fallback's failure does not
    replace it."""
    import workers.sdp.solvers as solvers

    assert solvers.clarabel_bytes((256, 256)) > 2.5e11
    assert solvers.clarabel_bytes((8, 8)) == 2 * 2 * 8 * (8 * 17) ** 2
    monkeypatch.setattr(solvers, "available_bytes", lambda: 1000)
    p = ocb_process()
    r = RobustnessProblem(p.scenario, "random", "exact",
                          SolverOptions(solver="CLARABEL", fallback=False)).solve(p.matrix)
    assert r.status == "error" and "Clarabel needs" in r.message
    capped = RobustnessProblem(p.scenario, "random", "exact",
                               SolverOptions(solver="SCS", max_iters=3)).solve(p.matrix)
    assert capped.status == "iteration_limit" and capped.solver == "SCS"
    assert "fallback CLARABEL error" in capped.message
