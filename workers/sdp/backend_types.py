"""What every SDP back-end takes and returns: :class:`SolverOptions`, :class:`RawSolution`,
the shared statuses and the back-end names.

Kept apart from the registry (:mod:`workers.sdp.solvers`), which imports the back-ends, so that
a back-end module (:mod:`workers.sdp.solver_ipm`, :mod:`workers.sdp.solver_admm`) can import
these types without importing the registry.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

SOLVERS = ("AUTO", "SCS", "CLARABEL", "IPM", "ADMM")
# the back-end a failed solve is retried with (SolverOptions.fallback)
FALLBACK = {"SCS": "CLARABEL", "CLARABEL": "SCS", "IPM": "SCS"}


STATUSES = ("optimal", "optimal_inaccurate", "infeasible", "unbounded", "iteration_limit",
            "time_limit", "failed", "error")
# SCS catches SIGINT itself and returns status -5; the back-end re-raises it as
# KeyboardInterrupt so that Ctrl-C stops a sweep instead of being recorded as a status.


@dataclass(frozen=True)
class SolverOptions:
    """Solver choice and accuracy.

    Attributes
    ----------
    solver
        ``"AUTO"`` (default: the built-in batched interior point ``"IPM"`` when the problem
        is small enough for it, see :func:`workers.sdp.solver_ipm.fits`, else ``"SCS"``),
        ``"SCS"`` (first-order), ``"CLARABEL"`` (interior point, real embedding), ``"IPM"``,
        or ``"ADMM"`` (matrix-free splitting, many processes per call; ``AUTO`` takes it when
        the conic matrix would not fit in memory, see :mod:`workers.sdp.solver_admm`).
    eps_abs, eps_rel
        SCS's absolute/relative tolerances; Clarabel's ``tol_gap_abs/rel`` and ``tol_feas``.
    max_iters
        Iteration cap.
    time_limit
        Seconds per solve (None = no limit).
    fallback
        On a failed solve, retry once with the other back-end (documented in the result).
    tol
        Decision threshold: a robustness is called positive only above ``tol`` plus the
        solver's own accuracy (see :mod:`workers.analysis.separability`).
    symmetry
        Solve a process with a continuous local-unitary symmetry in the commutant of its
        symmetry group (:mod:`workers.sdp.symmetry`; exact, and found and verified per process).
    """

    solver: str = "AUTO"
    eps_abs: float = 1e-8
    eps_rel: float = 1e-8
    max_iters: int = 200_000
    time_limit: float | None = None
    fallback: bool = True
    tol: float = 1e-6
    symmetry: bool = True

    def __post_init__(self) -> None:
        if self.solver.upper() not in SOLVERS:
            raise ValueError(f"solver={self.solver!r}, expected one of {list(SOLVERS)}")
        for name in ("eps_abs", "eps_rel", "tol"):
            v = getattr(self, name)
            if not (v > 0 and np.isfinite(v)):
                raise ValueError(f"{name}={v!r}, expected a positive number")
        if self.max_iters < 1:
            raise ValueError(f"max_iters={self.max_iters!r}, expected an integer >= 1")


@dataclass(frozen=True)
class RawSolution:
    """What a back-end returns: iterates, status and the solver's own accuracy figures."""

    solver: str
    status: str
    raw_status: str
    x: np.ndarray | None
    y: np.ndarray | None
    s: np.ndarray | None
    pobj: float
    dobj: float
    iterations: int
    res_pri: float
    res_dual: float
    gap: float
    solve_time: float
    setup_time: float
    message: str = ""


@dataclass(frozen=True)
class BatchFigures:
    """Per-sample figures of a batched solve (arrays over the batch axis), shared by the
    interior point's and the splitting solver's results."""

    pobj: np.ndarray
    dobj: np.ndarray
    res_pri: np.ndarray
    res_dual: np.ndarray
    gap: np.ndarray
    iterations: np.ndarray
    converged: np.ndarray         # bool: stopping criteria met
