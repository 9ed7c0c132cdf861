"""The matrix-free solver (ADMM in the product basis): published values, agreement with the
conic solvers, exact certificates of its answers, and the AUTO choice by problem size."""

import numpy as np
import pytest

import workers.sdp.solver_admm as solver_admm
from tests.conftest import random_valid_process
from workers.analysis.certified import certify
from workers.operators.families import ocb_process
from workers.structures.layout import build_layout
from workers.analysis.robustness import RobustnessProblem
from workers.operators.scenario import Scenario
from workers.analysis.separability import analyse
from workers.sdp.solvers import SolverOptions

ADMM = SolverOptions(solver="ADMM", eps_abs=1e-7, eps_rel=1e-7)


def test_ocb_random_robustness_and_certificate():
    """R_r(OCB) = sqrt2 - 1 (workers/THEORY.md §5), certified exactly from the ADMM duals."""
    p = ocb_process()
    res = analyse(p.scenario, p.matrix, ("random",), "exact", ADMM, keep_certificate=True)
    r = res.bounds["random"].upper_from
    assert r.solver == "ADMM" and r.status == "optimal"
    assert r.value == pytest.approx(np.sqrt(2) - 1, abs=1e-6)
    assert r.witness_value == pytest.approx(-r.value, abs=1e-6)
    cv = certify(p.scenario, p.matrix, res)
    assert cv.certified and cv.verdict == "nonseparable"
    assert cv.margin == pytest.approx(np.sqrt(2) - 1, abs=1e-6)


@pytest.mark.parametrize("dims,method", [
    ([2, 2, 2, 2], "exact"), ([2, 2, 3, 2], "exact"), ([2, 2, 2, 1, 2, 1], "exact"),
    pytest.param([2, 2, 2, 1, 2, 1, 2, 1], "necessary", marks=pytest.mark.slow),
    pytest.param([2, 2, 2, 1, 2, 1, 2, 1], "sufficient", marks=pytest.mark.slow)])
def test_agrees_with_scs(dims, method, rng):
    """Same random robustness as SCS on the compiled conic problem (seeded processes; both
    at eps 1e-7, where SCS still converges in seconds on the four-party problems)."""
    s = Scenario.from_dims(dims)
    admm = RobustnessProblem(s, "random", method, ADMM)
    scs = RobustnessProblem(s, "random", method,
                            SolverOptions(solver="SCS", eps_abs=1e-7, eps_rel=1e-7))
    for _ in range(2):
        W = random_valid_process(s, rng)
        a, b = admm.solve(W), scs.solve(W)
        assert a.status == "optimal" and b.status == "optimal"
        assert a.upper_bound == pytest.approx(b.upper_bound, abs=2e-5)
        assert a.lower_bound <= a.upper_bound + 2e-5


def test_leaves_and_duals_are_psd_and_complementary(rng):
    """Leaves W_j = Pi_K(s) and duals S_j = rho (W_j - s) come from one eigendecomposition:
    both PSD, Tr(S_j W_j) = 0, and the leaves sum to W + R 1° up to the residual."""
    s = Scenario.from_dims([2, 2, 2, 2])
    W = random_valid_process(s, rng)
    r = RobustnessProblem(s, "random", "exact", ADMM).solve(W, keep_certificate=True)
    for L, Y in zip(r.leaves, r.dual_blocks):
        assert np.linalg.eigvalsh(L)[0] > -1e-12 and np.linalg.eigvalsh(Y)[0] > -1e-12
        assert abs(np.trace(L @ Y)) < 1e-9
    target = W + r.upper_bound * np.eye(16) / 4
    assert np.abs(sum(r.leaves) - target).max() < 1e-5


def test_auto_takes_admm_only_above_the_size_limit(monkeypatch):
    s = Scenario.from_dims([2, 2, 2, 2])
    assert not solver_admm.needs_admm(build_layout(s, "exact"), "random")
    monkeypatch.setattr(solver_admm, "AUTO_NNZ", 10)
    for kind in ("random", "generalized"):
        assert solver_admm.needs_admm(build_layout(s, "exact"), kind)
        assert RobustnessProblem(s, kind, "exact").options.solver == "ADMM"


def test_generalized_robustness_and_certificate():
    """R_g(OCB) = 3 - 2 sqrt2 (workers/THEORY.md §5) from the splitting solver with Omega as
    a block; its witness is certified exactly and bounds R_r from below."""
    p = ocb_process()
    opts = SolverOptions(solver="ADMM", eps_abs=1e-7, eps_rel=1e-7, symmetry=False)
    res = analyse(p.scenario, p.matrix, ("generalized",), "exact", opts, keep_certificate=True)
    r = res.bounds["generalized"].upper_from
    assert r.solver == "ADMM" and r.status == "optimal"
    assert r.value == pytest.approx(3 - 2 * np.sqrt(2), abs=1e-6)
    assert r.omega is not None and np.linalg.eigvalsh(r.omega)[0] > -1e-9
    cv = certify(p.scenario, p.matrix, res)
    assert cv.certified and cv.verdict == "nonseparable"


def test_batch_results_do_not_depend_on_the_batch(rng):
    """solve_many over several processes equals one solve per process, bit for bit."""
    s = Scenario.from_dims([2, 2, 2, 2])
    Ws = [random_valid_process(s, rng, 1.0) for _ in range(4)]
    prob = RobustnessProblem(s, "random", "exact", ADMM)
    many = prob.solve_many(Ws)
    for W, r in zip(Ws, many):
        one = prob.solve(W)
        assert (one.upper_bound, one.lower_bound, one.iterations) == \
            (r.upper_bound, r.lower_bound, r.iterations)


def test_estimated_nnz_tracks_the_compiled_matrix():
    """The AUTO rule's size estimate is within 25% of the compiled A (tripartite qubits)."""
    from workers.sdp.conic import compile_problem

    s = Scenario.from_dims([2] * 6)
    est = build_layout(s, "exact").estimated_nnz()
    assert est == pytest.approx(compile_problem(s, "exact", "random").A.nnz, rel=0.25)
