"""Solver back-ends for compiled conic problems: a registry with capabilities as data.

Each back-end maps its native status onto one shared set (:data:`STATUSES`) and returns a
:class:`RawSolution` (both in :mod:`workers.sdp.backend_types`, with :class:`SolverOptions`,
so that the back-ends registered here import them without importing the registry).  A back-end never
raises for a numerical failure: the failure is the status (``"failed"``, ``"error"``) and the
message is kept.
"""

from __future__ import annotations

import time

import numpy as np
import scipy.sparse as sp

from .backend_types import FALLBACK, SOLVERS, STATUSES  # noqa: F401 - re-exported
from .backend_types import RawSolution, SolverOptions
from .conic import ConicProblem
from .solver_ipm import IpmBackend, fits

_SCS_STATUS = {1: "optimal", 2: "optimal_inaccurate", -1: "unbounded", -6: "unbounded",
               -2: "infeasible", -7: "infeasible", -3: "failed", -4: "failed",
               -5: "interrupted"}


class ScsBackend:
    """SCS called directly with its complex PSD cone.

    Cold solves use a fresh workspace (reproducible); warm-started solves reuse one and
    update only ``b``.
    """

    name = "SCS"
    fmt = "scs_complex"
    warm_startable = True

    def __init__(self, problem: ConicProblem, options: SolverOptions) -> None:
        import scs

        self.problem = problem
        settings = dict(eps_abs=options.eps_abs, eps_rel=options.eps_rel,
                        max_iters=options.max_iters, verbose=False)
        # no linear_solver: SCS's own choice is MKL Pardiso where the wheel ships it, else
        # QDLDL.  Forcing QDLDL (~15% faster on easy samples, no pivoting) broke down on the
        # quantum switch (two 256 x 256 blocks) after 153 s where Pardiso solves in 12.5 s,
        # and took 21525 and 186625 iterations on two tripartite-qubit samples (eps 1e-8)
        # against Pardiso's 1900 and 2475.
        if options.time_limit is not None:
            settings["time_limit_secs"] = float(options.time_limit)
        self.max_iters = options.max_iters
        self._settings = settings
        self._solver = None
        self.setup_time = 0.0

    def _fresh(self, b: np.ndarray):
        """A new SCS workspace.  SCS keeps its last iterate and adapted scale between
        ``solve`` calls even with ``warm_start=False``, so a cold solve on a reused workspace
        depends on what was solved before; a fresh one makes every cold solve reproducible
        whatever the task or worker (setup: ~3 ms bipartite, ~0.2 s tripartite qubits)."""
        import scs

        t0 = time.perf_counter()
        solver = scs.SCS(dict(A=self.problem.A, b=b, c=self.problem.c),
                         dict(cs=list(self.problem.cone_dims)), **self._settings)
        self.setup_time = time.perf_counter() - t0
        return solver

    def solve(self, b: np.ndarray, warm: RawSolution | None = None) -> RawSolution:
        t0 = time.perf_counter()
        try:
            if warm is not None and warm.x is not None:
                # warm starts (along a grid) reuse the workspace and its factorisation
                if self._solver is None:
                    self._solver = self._fresh(b)
                else:
                    self._solver.update(b=b)
                sol = self._solver.solve(warm_start=True, x=warm.x, y=warm.y, s=warm.s)
            else:
                sol = self._fresh(b).solve(warm_start=False)
        except Exception as exc:  # noqa: BLE001 - a failure is a status, never an abort
            return _error(self.name, exc, time.perf_counter() - t0)
        info = sol["info"]
        status = _SCS_STATUS.get(int(info["status_val"]), "failed")
        if status == "interrupted":
            raise KeyboardInterrupt("SCS solve interrupted (SIGINT)")
        if status != "optimal" and info["iter"] >= self.max_iters:
            status = "iteration_limit"
        return RawSolution(
            self.name, status, str(info["status"]), sol["x"], sol["y"], sol["s"],
            float(info["pobj"]), float(info["dobj"]), int(info["iter"]),
            float(info["res_pri"]), float(info["res_dual"]), float(abs(info["gap"])),
            time.perf_counter() - t0, self.setup_time,
        )


class ClarabelBackend:
    """Clarabel (interior point) on the real 2n x 2n embedding of each Hermitian block."""

    name = "CLARABEL"
    fmt = "upper_real"
    warm_startable = False

    def __init__(self, problem: ConicProblem, options: SolverOptions) -> None:
        import clarabel

        self.problem = problem
        st = clarabel.DefaultSettings()
        st.verbose = False
        st.tol_gap_abs = options.eps_abs
        st.tol_gap_rel = options.eps_rel
        st.tol_feas = max(options.eps_abs, 1e-12)
        st.max_iter = min(options.max_iters, 500)
        if options.time_limit is not None:
            st.time_limit = float(options.time_limit)
        self._settings = st
        self._cones = [clarabel.PSDTriangleConeT(2 * n) for n in problem.cone_dims]
        self._need = clarabel_bytes(problem.cone_dims)
        n = problem.A.shape[1]
        self._P = sp.csc_matrix((n, n))
        self.setup_time = 0.0

    def solve(self, b: np.ndarray, warm: RawSolution | None = None) -> RawSolution:
        import clarabel

        t0 = time.perf_counter()
        have = available_bytes()
        if self._need > have:
            # Clarabel would abort the whole process (a failed allocation is not an exception)
            return _error(self.name, MemoryError(
                f"Clarabel needs ~{self._need / 2**30:.1f} GiB for the dense PSD blocks "
                f"{tuple(self.problem.cone_dims)} (available {have / 2**30:.1f} GiB)"), 0.0)
        try:
            solver = clarabel.DefaultSolver(self._P, self.problem.c, self.problem.A, b,
                                            self._cones, self._settings)
            sol = solver.solve()
        except Exception as exc:  # noqa: BLE001 - a failure is a status, never an abort
            return _error(self.name, exc, time.perf_counter() - t0)
        raw = str(sol.status)
        status = _clarabel_status(raw)
        x, z, s = (np.array(v) for v in (sol.x, sol.z, sol.s))
        info = solver.info if hasattr(solver, "info") else None
        res_pri = float(getattr(info, "res_primal", np.nan)) if info is not None else np.nan
        res_dual = float(getattr(info, "res_dual", np.nan)) if info is not None else np.nan
        return RawSolution(
            self.name, status, raw, x, z, s, float(sol.obj_val), float(sol.obj_val_dual),
            int(sol.iterations), res_pri, res_dual,
            float(abs(sol.obj_val - sol.obj_val_dual)), time.perf_counter() - t0, 0.0,
        )


def clarabel_bytes(cone_dims) -> int:
    """Memory an interior point with dense PSD scalings needs for Hermitian blocks of sizes
    ``cone_dims``: each n x n block is a real 2n x 2n triangle of t = n(2n + 1) entries whose
    t x t Hessian block is dense, held in the KKT matrix and again in its factor."""
    return int(sum(2 * 8 * (n * (2 * n + 1)) ** 2 for n in cone_dims))


def available_bytes() -> int:
    """Memory available to this process now."""
    import psutil

    return int(psutil.virtual_memory().available)


def _clarabel_status(raw: str) -> str:
    key = raw.split(".")[-1].lower()
    return {"solved": "optimal", "almostsolved": "optimal_inaccurate",
            "primalinfeasible": "infeasible", "almostprimalinfeasible": "infeasible",
            "dualinfeasible": "unbounded", "almostdualinfeasible": "unbounded",
            "maxiterations": "iteration_limit", "maxtime": "time_limit"}.get(key, "failed")


def _error(name: str, exc: BaseException, elapsed: float) -> RawSolution:
    msg = f"{type(exc).__name__}: {exc}".splitlines()[0][:300]
    nan = float("nan")
    return RawSolution(name, "error", "exception", None, None, None, nan, nan, 0, nan, nan,
                       nan, elapsed, 0.0, msg)


def get_backend(name: str):
    """The back-end class for ``name`` (not ``AUTO``); the error lists the known names."""
    key = name.upper()
    if key == "SCS":
        return ScsBackend
    if key == "CLARABEL":
        return ClarabelBackend
    if key == "IPM":
        return IpmBackend
    raise ValueError(f"solver={name!r}, expected one of {list(SOLVERS[1:4])} (ADMM is not a "
                     "conic back-end: RobustnessProblem builds it from the layout)")


def resolve_solver(name: str, problem: ConicProblem | None = None) -> str:
    """The concrete back-end for ``name``: ``AUTO`` becomes IPM when ``problem`` fits it."""
    key = name.upper()
    if key != "AUTO":
        return key
    return "IPM" if problem is not None and fits(problem) else "SCS"
