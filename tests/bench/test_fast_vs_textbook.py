"""The compiled product-basis SDPs (workers/) agree with the textbook dense cvxpy SDPs (bench/).

Both sides formulate the robustness SDPs of Araújo et al., "Witnessing causal
nonseparability", NJP 17, 102001 (2015) (bipartite), and the tripartite dynamical-order
characterisation of Wechs, Abbott, Branciard, NJP 21, 013027 (2019) as written in workers/THEORY.md
§4, but share no code: bench/textbook.py uses dense Hermitian variables with
``cp.partial_trace``/``cp.kron``; bench/pauli_baseline.py Pauli coefficients with real-embedded
PSD blocks; workers/ uses per-pattern null spaces in the product basis.
Answers are compared on seeded random valid processes (no times are asserted).
"""

from __future__ import annotations

import cvxpy as cp
import numpy as np
import pytest

from bench.pauli_baseline import pauli_random_robustness
from bench.run import random_valid
from bench.textbook import (_tripartite_constraints, textbook_generalized_robustness,
                            textbook_random_robustness, textbook_random_robustness_tripartite)
from workers.operators.families import ocb_process
from workers.analysis.robustness import get_problem
from workers.operators.scenario import Scenario
from workers.sdp.solvers import SolverOptions

TOL = 2e-6  # both solvers run SCS at eps 1e-8; values are robustnesses of order 1e-2


def _samples(scenario: Scenario, seed: int, n: int, u: float = 0.9) -> list[np.ndarray]:
    rng = np.random.default_rng(seed)
    return [random_valid(scenario, rng, u) for _ in range(n)]


@pytest.mark.parametrize("kind", ["random", "generalized"])
def test_bipartite_qubits_agree(kind):
    """Bipartite qubits, random and generalised robustness (Araújo et al. 2015, sec. 5)."""
    s = Scenario.from_dims([2, 2, 2, 2])
    fn = textbook_random_robustness if kind == "random" else textbook_generalized_robustness
    prob = get_problem(s, kind, "exact", SolverOptions())
    values = []
    for W in _samples(s, 11, 4 if kind == "random" else 2, u=1.0):
        fast = prob.solve(W).value
        values.append(fast)
        assert fast == pytest.approx(fn(W, (2, 2, 2, 2), "SCS", 1e-8).value, abs=TOL)
    assert max(values) > 1e-3  # the sample includes nonseparable processes


def test_batched_fast_path_agrees():
    """The benchmark's fast path proper: one batched IPM call for several processes
    (bench.run._compare) gives the textbook values too."""
    s = Scenario.from_dims([2, 2, 2, 2])
    Ws = _samples(s, 13, 5, u=1.0)
    prob = get_problem(s, "random", "exact", SolverOptions(eps_abs=1e-8, eps_rel=1e-8))
    assert prob.options.solver == "IPM"
    for W, r in zip(Ws, prob.solve_many(Ws)):
        assert r.value == pytest.approx(textbook_random_robustness(W, (2, 2, 2, 2), "SCS",
                                                                   1e-8).value, abs=TOL)


@pytest.mark.slow
def test_tripartite_dynamical_agree():
    """Tripartite, C with a trivial output (32x32), OCB between A and B mixed with a random
    valid process: conditions (i)-(iii) of workers/THEORY.md §4 (Wechs, Abbott, Branciard 2019).
    The textbook side takes ~25 s here (its setup dominates)."""
    dims = (2, 2, 2, 2, 2, 1)
    s = Scenario.from_dims(list(dims))
    W = 0.6 * np.kron(ocb_process().matrix, np.eye(2) / 2) + 0.4 * _samples(s, 12, 1, 1.0)[0]
    fast = get_problem(s, "random", "exact", SolverOptions()).solve(W)
    slow = textbook_random_robustness_tripartite(W, dims, "SCS", 1e-8).value
    assert fast.value == pytest.approx(slow, abs=TOL)


@pytest.mark.slow
def test_tripartite_qubit_decomposition_meets_textbook_constraints():
    """Tripartite qubits (64x64): the fast path's optimal leaves W_(k,l,m) satisfy the
    textbook's dense conditions (i)-(iii) (workers/THEORY.md §4; Wechs, Abbott, Branciard 2019),
    are PSD, and sum to W + r 1° with r the reported (signed) optimum."""
    s = Scenario.from_dims([2] * 6)
    dims = (2,) * 6
    W = _samples(s, 13, 1)[0]
    prob = get_problem(s, "random", "exact", SolverOptions())
    r = prob.solve(W, keep_certificate=True)
    assert r.upper_bound == pytest.approx(r.lower_bound, abs=1e-6)
    leaves = dict(zip(prob.layout.structure.leaves, r.leaves))
    parts = {(o[0], o[1]): cp.Parameter((64, 64), complex=True, value=L)
             for o, L in leaves.items()}
    worst = max(float(np.max(np.abs(c.expr.value))) for c in _tripartite_constraints(parts, dims))
    assert worst < 1e-6
    assert min(np.linalg.eigvalsh(L)[0] for L in r.leaves) > -1e-7
    noise = np.eye(64) / 8
    assert np.allclose(sum(r.leaves), W + r.upper_bound * noise, atol=1e-6)


def test_pauli_baseline_agrees_tripartite_small():
    """Tripartite with C's output trivial (32 x 32): the fast path's signed optimum equals
    the Pauli-coefficient formulation's (both leave the noise weight free), for the exact
    dynamical-order characterisation (Wechs, Abbott, Branciard 2019)."""
    dims = (2, 2, 2, 2, 2, 1)
    s = Scenario.from_dims(list(dims))
    prob = get_problem(s, "random", "exact", SolverOptions())
    for W in _samples(s, 21, 2):
        fast = prob.solve(W).upper_bound
        assert fast == pytest.approx(pauli_random_robustness(W, dims, 1e-8).value, abs=TOL)


@pytest.mark.slow
def test_pauli_baseline_agrees_tripartite_qubits():
    """Three qubit parties, the benchmark's case (bench.run.tripartite_qubits): fast path at
    eps 1e-6 and 1e-8 against the Pauli-coefficient formulation at SCS eps 1e-7."""
    dims = (2,) * 6
    s = Scenario.from_dims(list(dims))
    W = _samples(s, 4, 1)[0]
    ref = pauli_random_robustness(W, dims, 1e-7).value
    for eps in (1e-6, 1e-8):
        fast = get_problem(s, "random", "exact", SolverOptions(eps_abs=eps, eps_rel=eps))
        assert fast.solve(W).upper_bound == pytest.approx(ref, abs=2e-5)
