"""The built-in batched interior-point back-end (``solver="IPM"``), for small problems.

It solves a compiled :class:`workers.sdp.conic.ConicProblem` with
:func:`workers.sdp.ipm.solve_batch` on the Hermitian matrices of its blocks.  The problem data A, c
are turned into matrices once; each batch of processes only changes ``b``.  A batch of k processes
costs about as much Python work as one, so :meth:`IpmBackend.solve_many` is the fast path of a sweep
task.

Its limits are data.  The Schur complement is a dense m x m matrix per sample and costs
O(m n^3 + m^2 n^2) per block and iteration, so ``AUTO`` picks the IPM only up to
:data:`AUTO_VARIABLES` variables and blocks of :data:`AUTO_BLOCK` (where it beats SCS on
this machine, bench/README.md); ``solver="IPM"`` takes up to :data:`MAX_VARIABLES` and
:data:`MAX_BLOCK`.  Larger problems (tripartite qubits: m ~ 3000) are for SCS.
"""

from __future__ import annotations

import time

import numpy as np

from .cone_vectors import complex_cone_to_matrices, matrices_to_complex_cone
from .conic import ConicProblem
from .ipm import SdpData, solve_batch
from .backend_types import RawSolution, SolverOptions

AUTO_VARIABLES = 128
AUTO_BLOCK = 32
MAX_VARIABLES = 1000
MAX_BLOCK = 64
MAX_ITERS = 100  # interior-point iterations; the problems here need 10-25
INACCURATE = 100.0  # a broken-down sample within this many tolerances is optimal_inaccurate


def fits(problem: ConicProblem, auto: bool = True) -> bool:
    """Whether the IPM back-end takes this problem: by ``AUTO``'s limits, or (``auto``
    False) by the hard limits of an explicit ``solver="IPM"``."""
    m_max, n_max = (AUTO_VARIABLES, AUTO_BLOCK) if auto else (MAX_VARIABLES, MAX_BLOCK)
    return (problem.fmt == "scs_complex" and problem.A.shape[1] <= m_max
            and max(problem.cone_dims) <= n_max)


class IpmBackend:
    """Batched primal-dual interior point (HKM direction, Mehrotra predictor-corrector)."""

    name = "IPM"
    fmt = "scs_complex"
    warm_startable = False

    def __init__(self, problem: ConicProblem, options: SolverOptions) -> None:
        if not fits(problem, auto=False):
            raise ValueError(
                f"solver='IPM' takes problems with at most {MAX_VARIABLES} variables and PSD "
                f"blocks up to {MAX_BLOCK}x{MAX_BLOCK}; this one has {problem.A.shape[1]} and "
                f"blocks {list(problem.cone_dims)}: use solver='SCS'")
        t0 = time.perf_counter()
        self.problem = problem
        self.options = options
        A = problem.A.toarray()
        self._slices = problem.block_slices()
        mats = tuple(complex_cone_to_matrices(A[sl].T, n)
                     for sl, n in zip(self._slices, problem.cone_dims))
        self.data = SdpData(mats, np.asarray(problem.c, dtype=float))
        self.setup_time = time.perf_counter() - t0

    def solve(self, b: np.ndarray, warm: RawSolution | None = None) -> RawSolution:
        return self.solve_many(np.asarray(b)[None])[0]

    def solve_many(self, bs: np.ndarray) -> list[RawSolution]:
        """Solve for every row of ``bs``; each solution's ``solve_time`` is the batch's wall
        time divided by the batch size."""
        bs = np.atleast_2d(np.asarray(bs, dtype=float))
        t0 = time.perf_counter()
        B = tuple(complex_cone_to_matrices(bs[:, sl], n)
                  for sl, n in zip(self._slices, self.problem.cone_dims))
        o = self.options
        sol = solve_batch(self.data, B, o.eps_abs, o.eps_rel, min(o.max_iters, MAX_ITERS))
        per = (time.perf_counter() - t0) / len(bs)
        y = np.concatenate([matrices_to_complex_cone(Y) for Y in sol.Y], axis=1)
        s = np.concatenate([matrices_to_complex_cone(S) for S in sol.S], axis=1)
        out = []
        for i in range(len(bs)):
            status, raw = self._status(sol, i)
            out.append(RawSolution(
                self.name, status, raw, sol.x[i].copy(), y[i], s[i], float(sol.pobj[i]),
                float(sol.dobj[i]), int(sol.iterations[i]), float(sol.res_pri[i]),
                float(sol.res_dual[i]), float(sol.gap[i]), per, self.setup_time))
        return out

    def _status(self, sol, i: int) -> tuple[str, str]:
        if sol.converged[i]:
            return "optimal", "converged"
        o = self.options
        acc = max(sol.gap[i], sol.res_pri[i], sol.res_dual[i])
        scale = max(1.0, abs(sol.pobj[i]), abs(sol.dobj[i]))
        loose = INACCURATE * (o.eps_abs + o.eps_rel * scale)
        raw = "numerical breakdown" if sol.failed[i] else "iteration limit"
        if np.isfinite(acc) and acc <= loose:
            return "optimal_inaccurate", raw
        return ("failed" if sol.failed[i] else "iteration_limit"), raw
