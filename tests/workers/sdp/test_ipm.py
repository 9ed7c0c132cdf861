"""The batched interior-point method: closed-form optima, agreement with SCS and Clarabel,
independence of the batch, and breakdowns reported as statuses."""

import numpy as np
import pytest

from tests.conftest import random_valid_process
from workers.operators.families import ocb_process
from workers.sdp.ipm import SdpData, solve_batch
from workers.analysis.robustness import RobustnessProblem, get_problem
from workers.operators.scenario import Scenario
from workers.sdp.solver_ipm import fits
from workers.sdp.solvers import SolverOptions

IPM = SolverOptions(solver="IPM")


def _herm(rng, n, batch):
    G = rng.standard_normal((batch, n, n)) + 1j * rng.standard_normal((batch, n, n))
    return (G + np.swapaxes(G, 1, 2).conj()) / 2


def test_largest_eigenvalue_batch(rng):
    """min t s.t. t 1 - C ⪰ 0 is lambda_max(C) (Rayleigh; common practice), for a batch of
    random Hermitian C at once."""
    n = 6
    C = _herm(rng, n, 12)
    data = SdpData((-np.eye(n, dtype=complex)[None],), np.array([1.0]))
    sol = solve_batch(data, (-C,), 1e-10, 1e-10)
    assert sol.converged.all()
    assert np.allclose(sol.pobj, np.linalg.eigvalsh(C)[:, -1], atol=1e-8)
    # the dual is a density matrix on the top eigenvector: Tr Y = 1, Tr(C Y) = lambda_max
    Y = sol.Y[0]
    assert np.allclose(np.trace(Y, axis1=1, axis2=2).real, 1.0, atol=1e-8)
    assert np.allclose(np.einsum("bij,bji->b", C, Y).real, sol.pobj, atol=1e-7)


def test_batch_does_not_change_a_sample(rng):
    """Each sample's iterates are its own: the same W solved alone or inside a batch gives
    bit-identical answers (needed for results that do not depend on the task size)."""
    s = Scenario.from_dims([2, 2, 2, 2])
    prob = get_problem(s, "random", "exact", IPM)
    Ws = [random_valid_process(s, rng) for _ in range(9)]
    together = prob.solve_many(Ws)
    for W, r in zip(Ws, together):
        alone = prob.solve(W)
        assert alone.upper_bound == r.upper_bound and alone.iterations == r.iterations


def test_agrees_with_scs_and_clarabel(rng):
    """Three independent solvers agree on seeded random valid processes (qubits and a
    qutrit input) to their stated tolerances."""
    for dims in ([2, 2, 2, 2], [2, 2, 3, 2]):
        s = Scenario.from_dims(dims)
        Ws = [random_valid_process(s, rng, 1.0) for _ in range(6)]
        ipm = get_problem(s, "random", "exact", IPM).solve_many(Ws)
        for W, r in zip(Ws, ipm):
            assert r.solver == "IPM" and r.status == "optimal" and r.iterations < 40
            scs = RobustnessProblem(s, "random", "exact", SolverOptions(solver="SCS")).solve(W)
            cla = RobustnessProblem(s, "random", "exact",
                                    SolverOptions(solver="CLARABEL")).solve(W)
            assert r.upper_bound == pytest.approx(scs.upper_bound, abs=1e-6)
            assert r.upper_bound == pytest.approx(cla.upper_bound, abs=1e-6)


def test_ocb_values_and_certificates():
    """R_r(OCB) = sqrt2 - 1 and R_g = 3 - 2 sqrt2 (workers/THEORY.md §5) with the IPM, and its
    interior duals and leaves are PSD: the witness has Tr(S W) = -R_r."""
    p = ocb_process()
    r = get_problem(p.scenario, "random", "exact", IPM).solve(p.matrix, keep_certificate=True)
    g = get_problem(p.scenario, "generalized", "exact", IPM).solve(p.matrix)
    assert r.value == pytest.approx(np.sqrt(2) - 1, abs=1e-8)
    assert g.value == pytest.approx(3 - 2 * np.sqrt(2), abs=1e-8)
    assert r.witness_value == pytest.approx(-r.value, abs=1e-8)
    assert min(np.linalg.eigvalsh(Y)[0] for Y in r.dual_blocks) > -1e-12
    assert min(np.linalg.eigvalsh(L)[0] for L in r.leaves) > -1e-12


def test_breakdown_is_a_status_and_spares_the_batch(rng):
    """A sample whose second block is fixed at -1 (no feasible point) cannot converge; it
    leaves the batch unconverged while the other samples get their closed-form answers."""
    n = 4
    C = _herm(rng, n, 3)
    A = (-np.eye(n, dtype=complex)[None], np.zeros((1, 2, 2), dtype=complex))
    data = SdpData(A, np.array([1.0]))
    second = np.array([np.eye(2), -np.eye(2), np.eye(2)], dtype=complex)  # 1: infeasible
    sol = solve_batch(data, (-C, second), 1e-9, 1e-9, max_iters=60)
    assert not sol.converged[1] and (sol.failed[1] or sol.iterations[1] == 60)
    assert sol.converged[[0, 2]].all()
    assert np.allclose(sol.pobj[[0, 2]], np.linalg.eigvalsh(C[[0, 2]])[:, -1], atol=1e-8)


def test_auto_takes_ipm_only_where_it_fits():
    """AUTO resolves to IPM for bipartite qubits (both robustness measures); tripartite
    qubits, whose dense Schur complement (about 3000 variables) the IPM refuses, go to the
    matrix-free solver (random robustness, 32 x 32 blocks) or SCS."""
    small = get_problem(Scenario.from_dims([2] * 4), "random", "exact", SolverOptions())
    assert small.options.solver == "IPM" and fits(small.problem)
    big = RobustnessProblem(Scenario.from_dims([2] * 6), "random", "exact", SolverOptions())
    assert big.options.solver == "ADMM"
    big = RobustnessProblem(Scenario.from_dims([2] * 6), "random", "exact",
                            SolverOptions(solver="SCS"))
    assert not fits(big.problem, auto=False)
    with pytest.raises(ValueError, match="solver='IPM' takes problems with at most"):
        RobustnessProblem(Scenario.from_dims([2] * 6), "random", "exact", IPM)
    gen = get_problem(Scenario.from_dims([2] * 4), "generalized", "exact", SolverOptions())
    assert gen.options.solver == "IPM"  # 104 variables, blocks 8, 8, 16
    qutrit = get_problem(Scenario.from_dims([2, 2, 3, 2]), "generalized", "exact",
                         SolverOptions())
    assert qutrit.options.solver == "SCS" and fits(qutrit.problem, auto=False)  # 249
