"""Textbook causal-robustness SDPs: dense cvxpy variables, one fresh problem per call.

This is the way the problem is usually written by hand (Araújo et al., "Witnessing causal
nonseparability", NJP 17, 102001 (2015)): dense Hermitian variables for the parts of a causally
separable decomposition, positivity, and the trace-and-replace constraints written as matrix
equations with ``cp.partial_trace`` and ``cp.kron``. It is deliberately plain. It serves as a
speed baseline in benchmarks and as an independent cross-check of the product-basis code in
``workers/``; it shares no code with it.

Subsystem order: A1_I, A1_O, A2_I, A2_O, ... (no global past or future here), so party ``k``
(0-based) owns subsystem ``2k`` (input) and ``2k + 1`` (output). White noise is
``1° = 1 / d_I`` with ``d_I`` the product of the input dimensions.
"""

from __future__ import annotations

import itertools
import math
import time
from dataclasses import dataclass
from typing import Sequence

import cvxpy as cp
import numpy as np

_SOLVERS = ("SCS", "CLARABEL")


@dataclass(frozen=True)
class TextbookResult:
    """Outcome of one textbook SDP solve.

    Attributes
    ----------
    value : float
        Optimal objective (the robustness), ``nan`` when the solver returned none.
    status : str
        cvxpy status string (``"optimal"``, ``"optimal_inaccurate"``, ...).
    solve_time : float
        Wall seconds spent in ``Problem.solve`` minus cvxpy's compilation time.
    setup_time : float
        Wall seconds building the cvxpy expressions plus cvxpy's compilation time.
    """

    value: float
    status: str
    solve_time: float
    setup_time: float


def trace_replace(x: cp.Expression, dims: Sequence[int], axes: Sequence[int]) -> cp.Expression:
    """Trace-and-replace map ``_X x = Tr_X(x) ⊗ 1_X / d_X`` as a cvxpy expression.

    Parameters
    ----------
    x : cvxpy.Expression
        Square expression on the tensor product of subsystems with dimensions ``dims``.
    dims : sequence of int
        Subsystem dimensions, in the operator's subsystem order.
    axes : sequence of int
        Indices of the subsystems making up ``X``; empty means the identity map.

    Returns
    -------
    cvxpy.Expression
        ``Tr_X(x) ⊗ 1_X / d_X`` with the subsystems back in their original order.
    """
    traced = sorted(set(axes))
    if not traced:
        return x
    kept = [a for a in range(len(dims)) if a not in traced]
    reduced, current = x, list(dims)
    for ax in reversed(traced):
        reduced = cp.partial_trace(reduced, current, axis=ax)
        del current[ax]
    d_x = math.prod(dims[a] for a in traced)
    full = cp.kron(reduced, np.eye(d_x) / d_x)  # subsystem order: kept..., traced...
    order = kept + traced
    if order == sorted(order):
        return full
    position = np.arange(math.prod(dims)).reshape(dims).transpose(order).ravel()
    back = np.argsort(position)  # row of `full` holding each original basis index
    return full[back, :][:, back]


def _party_axes(k: int) -> list[int]:
    """Subsystem indices (input, output) of party ``k`` (0-based)."""
    return [2 * k, 2 * k + 1]


def validity_map(x: cp.Expression, dims: Sequence[int]) -> cp.Expression:
    """Projector ``L_V`` onto the span of valid process operators (Araújo et al. 2015, app.).

    ``L_V = 1 - Π_k (1 - _{A_O^k} + _{A_I^k A_O^k}) + _{all}``, expanded term by term.
    """
    n_parties = len(dims) // 2
    product = 0
    for choice in itertools.product((0, 1, 2), repeat=n_parties):
        axes: list[int] = []
        for k, c in enumerate(choice):
            axes += [] if c == 0 else _party_axes(k)[2 - c:]
        sign = (-1) ** sum(c == 1 for c in choice)
        product = product + sign * trace_replace(x, dims, axes)
    return x - product + trace_replace(x, dims, range(len(dims)))


def _check_inputs(w: np.ndarray, dims: Sequence[int], n_parties: int) -> np.ndarray:
    """Validate ``dims`` and the shape and Hermiticity of ``w``; return ``w`` as an array."""
    dims = tuple(dims)
    if len(dims) != 2 * n_parties or any(int(d) != d or d < 1 for d in dims):
        raise ValueError(f"dims={dims} must be {2 * n_parties} positive integers "
                         f"(d_I, d_O per party for {n_parties} parties)")
    w = np.asarray(w, dtype=complex)
    size = math.prod(dims)
    if w.shape != (size, size):
        raise ValueError(f"W has shape {w.shape} but dims={dims} multiply to {size}; "
                         f"expected a {size}x{size} matrix")
    if not np.allclose(w, w.conj().T, atol=1e-9):
        raise ValueError("W is not Hermitian; expected W == W^dagger to within 1e-9")
    return w


def _comb_constraints(x: cp.Expression, dims: Sequence[int], order: Sequence[int]) -> list:
    """Fixed-order comb equalities for ``x`` with parties in time order ``order``.

    For each position ``n``: ``_{A^rest} x = _{A_O^{k_n} A^rest} x`` with ``rest`` the later
    parties; for the last party this is ``x = _{A_O^last} x`` (Araújo et al. 2015, sec. 3).
    """
    constraints = []
    for n, k in enumerate(order):
        rest = [a for j in order[n + 1:] for a in _party_axes(j)]
        constraints.append(trace_replace(x, dims, rest)
                           == trace_replace(x, dims, [2 * k + 1] + rest))
    return constraints


def _bipartite_parts(dims: Sequence[int]) -> tuple[list[cp.Variable], list]:
    """Variables ``W^{A<B}``, ``W^{B<A}`` ⪰ 0 with their comb constraints."""
    size = math.prod(dims)
    parts = [cp.Variable((size, size), hermitian=True) for _ in range(2)]
    constraints = [p >> 0 for p in parts]
    constraints += _comb_constraints(parts[0], dims, (0, 1))
    constraints += _comb_constraints(parts[1], dims, (1, 0))
    return parts, constraints


def _white_noise(dims: Sequence[int]) -> np.ndarray:
    """``1° = 1 / d_I`` with ``d_I`` the product of the input dimensions."""
    return np.eye(math.prod(dims)) / math.prod(dims[0::2])


def _solve(objective: cp.Expression, constraints: list, t_start: float, solver: str,
           eps: float, max_iters: int) -> TextbookResult:
    """Minimise ``objective`` with the chosen solver and time the phases."""
    name = solver.upper()
    if name not in _SOLVERS:
        raise ValueError(f"solver={solver!r} is not supported; expected one of {_SOLVERS}")
    if name == "SCS":
        options = dict(eps_abs=eps, eps_rel=eps, max_iters=max_iters)
    else:
        options = dict(tol_gap_abs=eps, tol_gap_rel=eps, tol_feas=eps, max_iter=max_iters)
    problem = cp.Problem(cp.Minimize(objective), constraints)
    built = time.perf_counter()
    try:
        problem.solve(solver=name, **options)
    except cp.error.SolverError as err:
        return TextbookResult(float("nan"), f"solver_error: {err}", time.perf_counter() - built,
                              built - t_start)
    wall = time.perf_counter() - built
    compile_s = problem.compilation_time or 0.0
    value = float("nan") if problem.value is None else float(problem.value)
    return TextbookResult(value, problem.status, wall - compile_s, built - t_start + compile_s)


def textbook_random_robustness(w: np.ndarray, dims: Sequence[int], solver: str = "SCS",
                               eps: float = 1e-8, max_iters: int = 200_000) -> TextbookResult:
    """Bipartite random robustness by the textbook SDP (Araújo et al. 2015, sec. 5).

    ``min r  s.t.  W + r 1° = W^{A<B} + W^{B<A}``, both parts ⪰ 0 and combs of their order,
    ``r ≥ 0``.

    Parameters
    ----------
    w : numpy.ndarray
        Process operator on ``A_I A_O B_I B_O``.
    dims : sequence of int
        ``(d_AI, d_AO, d_BI, d_BO)``.
    solver : {"SCS", "CLARABEL"}
        Back-end solver called through cvxpy.
    eps : float
        SCS ``eps_abs``/``eps_rel``, or Clarabel's gap and feasibility tolerances.
    max_iters : int
        Iteration cap passed to the solver.
    """
    t_start = time.perf_counter()
    w = _check_inputs(w, dims, 2)
    r = cp.Variable(nonneg=True)
    parts, constraints = _bipartite_parts(dims)
    constraints.append(w + r * _white_noise(dims) == parts[0] + parts[1])
    return _solve(r, constraints, t_start, solver, eps, max_iters)


def textbook_generalized_robustness(w: np.ndarray, dims: Sequence[int], solver: str = "SCS",
                                    eps: float = 1e-8,
                                    max_iters: int = 200_000) -> TextbookResult:
    """Bipartite generalised robustness by the textbook SDP (Araújo et al. 2015, sec. 5).

    ``min r  s.t.  W + Ω̃ = W^{A<B} + W^{B<A}`` with ``Ω̃ = r Ω ⪰ 0``, ``L_V(Ω̃) = Ω̃`` and
    ``Tr Ω̃ = r d_O``. Parameters as in :func:`textbook_random_robustness`.
    """
    t_start = time.perf_counter()
    w = _check_inputs(w, dims, 2)
    r = cp.Variable(nonneg=True)
    size = math.prod(dims)
    omega = cp.Variable((size, size), hermitian=True)
    parts, constraints = _bipartite_parts(dims)
    constraints += [omega >> 0, validity_map(omega, dims) == omega,
                    cp.real(cp.trace(omega)) == r * math.prod(dims[1::2]),
                    w + omega == parts[0] + parts[1]]
    return _solve(r, constraints, t_start, solver, eps, max_iters)


def _tripartite_constraints(parts: dict[tuple[int, int], cp.Variable],
                            dims: Sequence[int]) -> list:
    """Conditions (i)-(iii) of workers/THEORY.md §4 (Wechs, Abbott, Branciard, NJP 21, 013027)."""
    constraints = []
    for k in range(3):
        others = [j for j in range(3) if j != k]
        first = parts[(k, others[0])] + parts[(k, others[1])]
        later = _party_axes(others[0]) + _party_axes(others[1])
        constraints.append(trace_replace(first, dims, later)
                           == trace_replace(first, dims, [2 * k + 1] + later))
        for l in others:
            m = 3 - k - l
            x = parts[(k, l)]
            constraints.append(trace_replace(x, dims, _party_axes(m))
                               == trace_replace(x, dims, [2 * l + 1] + _party_axes(m)))
            constraints.append(x == trace_replace(x, dims, [2 * m + 1]))
    return constraints


def textbook_random_robustness_tripartite(w: np.ndarray, dims: Sequence[int],
                                          solver: str = "SCS", eps: float = 1e-8,
                                          max_iters: int = 200_000) -> TextbookResult:
    """Tripartite random robustness with dynamical causal order (workers/THEORY.md §4).

    ``min r  s.t.  W + r 1° = Σ_{k≠l} W_(k,l)``, each ``W_(k,l) ⪰ 0`` and satisfying
    conditions (i)-(iii) as dense matrix equations; ``r ≥ 0``. Six dense variables of the full
    size, and cvxpy compilation dominates: measured on a 2-core machine, 32x32 took ~10 s of
    setup; three qubit parties (64x64, white noise) took 363 s of setup and 9.1 GB peak RSS.

    Parameters
    ----------
    w : numpy.ndarray
        Process operator on ``A_I A_O B_I B_O C_I C_O``.
    dims : sequence of int
        ``(d_AI, d_AO, d_BI, d_BO, d_CI, d_CO)``.
    solver, eps, max_iters
        As in :func:`textbook_random_robustness`.
    """
    t_start = time.perf_counter()
    w = _check_inputs(w, dims, 3)
    size = math.prod(dims)
    r = cp.Variable(nonneg=True)
    parts = {(k, l): cp.Variable((size, size), hermitian=True)
             for k in range(3) for l in range(3) if k != l}
    constraints = [p >> 0 for p in parts.values()]
    constraints += _tripartite_constraints(parts, dims)
    constraints.append(w + r * _white_noise(dims) == sum(parts.values()))
    return _solve(r, constraints, t_start, solver, eps, max_iters)
