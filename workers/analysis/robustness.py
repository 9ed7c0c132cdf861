"""Random and generalised robustness with their witnesses (Araujo et al., NJP 17, 102001 (2015)).

:class:`RobustnessProblem` compiles one SDP per (scenario, structure, kind, solver) and
re-solves it for every process; :func:`get_problem` caches them per worker process.
The dual of the solve is read as a causal witness S with Tr(S W) = -(robustness) at the
optimum, Tr(S 1°) = 1 (random) or Tr(S Om) <= 1 for all valid Om (generalised).
"""

from __future__ import annotations

from dataclasses import dataclass, field, replace
from functools import lru_cache

import numpy as np

from workers.operators.basis import from_coefficients, to_coefficients
from workers.sdp.cone_vectors import cone_to_matrix
from workers.sdp.conic import ConicProblem, compile_problem
from workers.structures.layout import build_layout
from workers.structures.leaf_spaces import embed_identity
from workers.sdp.solver_admm import AdmmBackend, fits_in_memory, needs_admm
from workers.operators.scenario import Scenario
from workers.sdp.solvers import FALLBACK, RawSolution, SolverOptions, get_backend, resolve_solver
from workers.operators.validity import check_shape

FAILED = ("failed", "error", "infeasible", "unbounded")
# statuses after which the other back-end is tried (when ``SolverOptions.fallback``)
RETRY = FAILED + ("iteration_limit", "time_limit")


@dataclass(frozen=True)
class RobustnessResult:
    """One robustness solve and its evidence.

    ``value`` is max(upper_bound, 0) when the solve succeeded, else nan.  ``upper_bound`` is
    the primal objective, ``lower_bound`` the dual objective (both signed).  ``witness`` is the
    operator S read from the dual, ``witness_value`` = Tr(S W).
    """

    kind: str
    method: str
    value: float
    lower_bound: float
    upper_bound: float
    solver: str
    status: str
    raw_status: str
    iterations: int
    res_pri: float
    res_dual: float
    gap: float
    solve_time: float
    setup_time: float
    witness_value: float
    witness: np.ndarray | None = field(default=None, repr=False, compare=False)
    leaves: tuple[np.ndarray, ...] | None = field(default=None, repr=False, compare=False)
    dual_blocks: tuple[np.ndarray, ...] | None = field(default=None, repr=False, compare=False)
    omega: np.ndarray | None = field(default=None, repr=False, compare=False)
    message: str = ""
    fallback_from: str = ""
    raw: object = field(default=None, repr=False, compare=False)  # the back-end's solution

    @property
    def ok(self) -> bool:
        return self.status not in FAILED

    @property
    def accuracy(self) -> float:
        """The solver's own accuracy: the largest of gap and residuals (nan if unknown)."""
        vals = [v for v in (self.gap, self.res_pri, self.res_dual) if np.isfinite(v)]
        return max(vals) if vals else float("nan")


class RobustnessProblem:
    """A compiled robustness SDP for one scenario; call :meth:`solve` with each W."""

    def __init__(
        self,
        scenario: Scenario,
        kind: str = "random",
        method: str = "exact",
        options: SolverOptions = SolverOptions(),
    ) -> None:
        self.scenario, self.kind, self.method = scenario, kind, method
        self.layout = build_layout(scenario, method)
        self.problem: ConicProblem | None = None
        wanted = options.solver.upper()
        if wanted == "ADMM" or (wanted == "AUTO" and needs_admm(self.layout, kind)):
            self.options = replace(options, solver="ADMM")  # no conic matrix at all
            self.backend = AdmmBackend(self.layout, kind, self.options)
            return
        fmt = "upper_real" if wanted == "CLARABEL" else "scs_complex"
        self.problem = compile_problem(scenario, method, kind, fmt)
        solver = resolve_solver(options.solver, self.problem)
        self.options = replace(options, solver=solver)
        self.backend = get_backend(solver)(self.problem, self.options)

    def coefficients(self, W: np.ndarray) -> np.ndarray:
        """Coefficient vector of W; raises if W leaves the span of the causal structure."""
        W = check_shape(self.scenario, W)
        w = to_coefficients(W, self.scenario.subsystem_dims)
        outside = np.linalg.norm(w[~self.layout.spanned]) / max(np.linalg.norm(w), 1e-300)
        if outside > 1e-7:
            raise ValueError(
                f"operator is not in the valid subspace of this scenario (relative residual "
                f"{outside:.2e}); run the validity check first"
            )
        return w

    def solve(
        self,
        W: np.ndarray,
        warm_start: RobustnessResult | None = None,
        keep_certificate: bool = False,
    ) -> RobustnessResult:
        """Solve for W; a failed solve is retried once with the other back-end if enabled."""
        w = self.coefficients(W)
        if self.problem is None:  # a matrix-free warm start: another structure's solve of W
            start = self.backend.start_from([warm_start] if warm_start is not None else None)
            res = self._admm_result(self.backend.solve_many_w(w[None], start)[0], w,
                                    keep_certificate)
            return self._admm_fallback(W, res, keep_certificate)
        warm = warm_start.raw if warm_start is not None and self.backend.warm_startable else None
        raw = self.backend.solve(self.problem.b(w), warm)
        return self._finish(W, raw, w, keep_certificate)

    def solve_many(self, Ws, keep_certificate: bool = False, warm_start: bool = False,
                   start: list[RobustnessResult] | None = None) -> list[RobustnessResult]:
        """Solve for every W of ``Ws``; one batched call when the back-end has one (IPM,
        ADMM), so the per-iteration work is shared by the batch.

        ``warm_start`` (warm-startable back-ends, i.e. SCS): each solve starts from the
        previous one's solution, which pays along a grid of nearby processes; the answers
        then depend on the order of ``Ws`` at the solver's accuracy.  ``start`` (ADMM):
        results of another structure's matrix-free solve of the same processes, one per W,
        to start each iteration from (the sufficient bound from the necessary one, N >= 4);
        each answer then depends on its own process only.
        """
        if self.problem is None:  # the matrix-free back-end batches too
            ws = [self.coefficients(W) for W in Ws]
            if not ws:
                return []
            sols = self.backend.solve_many_w(np.array(ws), self.backend.start_from(start))
            return [self._admm_fallback(W, self._admm_result(sol, w, keep_certificate),
                                        keep_certificate) for W, sol, w in zip(Ws, sols, ws)]
        if warm_start and self.backend.warm_startable:
            out, prev = [], None
            for W in Ws:
                prev = self.solve(W, warm_start=prev, keep_certificate=keep_certificate)
                out.append(prev)
            return out
        ws = [self.coefficients(W) for W in Ws]
        if not ws:
            return []
        many = getattr(self.backend, "solve_many", None)
        bs = np.array([self.problem.b(w) for w in ws])
        raws = many(bs) if many is not None else [self.backend.solve(b) for b in bs]
        return [self._finish(W, raw, w, keep_certificate) for W, raw, w in zip(Ws, raws, ws)]

    def _finish(self, W, raw: RawSolution, w: np.ndarray, keep: bool) -> RobustnessResult:
        """The result of a raw solve, retried once with the fallback back-end if it failed."""
        result = self._result(raw, w, keep)
        if result.status in RETRY and self.options.fallback and self.options.solver in FALLBACK:
            # the other back-end keeps the tolerances but its own default iteration cap
            alt_opts = replace(self.options, solver=FALLBACK[self.options.solver],
                               fallback=False, max_iters=SolverOptions().max_iters)
            alt = get_problem(self.scenario, self.kind, self.method, alt_opts)
            second = alt.solve(W, keep_certificate=keep)
            if second.status in FAILED and result.status not in FAILED:
                # an unfinished iterate (iteration or time limit) says more than a failure
                note = f"fallback {second.solver} {second.status}: {second.message}"
                return replace(result, message="; ".join(m for m in (result.message, note) if m))
            return replace(second, fallback_from=f"{result.solver}:{result.status}")
        return result

    def _result(self, raw: RawSolution, w: np.ndarray, keep: bool) -> RobustnessResult:
        nan = float("nan")
        ok = raw.status not in FAILED and raw.x is not None
        witness = leaves = duals = omega = None
        wval = nan
        if ok:
            s_coef, duals = self._witness_coefficients(raw.y, keep)
            witness = from_coefficients(s_coef, self.scenario.subsystem_dims)
            wval = float(s_coef @ w / self.scenario.dim)
            if keep:
                leaves, omega = self._primal_blocks(raw.s)
        value = max(raw.pobj, 0.0) if ok else nan
        return RobustnessResult(
            self.kind, self.method, value, raw.dobj if ok else nan, raw.pobj if ok else nan,
            raw.solver, raw.status, raw.raw_status, raw.iterations, raw.res_pri, raw.res_dual,
            raw.gap, raw.solve_time, raw.setup_time, wval, witness, leaves, duals, omega,
            raw.message, "", raw,
        )

    def _admm_fallback(self, W, result: RobustnessResult, keep: bool) -> RobustnessResult:
        """A failed or capped matrix-free solve is redone by SCS when its matrix fits."""
        if (result.status not in RETRY or not self.options.fallback
                or not fits_in_memory(self.layout)):
            return result
        alt = get_problem(self.scenario, self.kind, self.method,
                          replace(self.options, solver="SCS", fallback=False,
                                  max_iters=SolverOptions().max_iters))
        second = alt.solve(W, keep_certificate=keep)
        if second.status in FAILED:
            return result
        return replace(second, fallback_from=f"ADMM:{result.status}")

    def _admm_result(self, sol, w: np.ndarray, keep: bool) -> RobustnessResult:
        """The result of a matrix-free solve (:mod:`workers.sdp.solver_admm`)."""
        nan = float("nan")
        s_coef = self.backend.witness_coefficients(sol)
        witness = from_coefficients(s_coef, self.scenario.subsystem_dims)
        leaves, duals, omega = self.backend.full_blocks(sol) if keep else (None, None, None)
        status = self.backend.status(sol)
        return RobustnessResult(
            self.kind, self.method, max(sol.pobj, 0.0), sol.dobj, sol.pobj, "ADMM", status,
            "converged" if sol.converged else status, sol.iterations, sol.res_pri,
            sol.res_dual, sol.gap, sol.solve_time, self.backend.setup_time,
            float(s_coef @ w / self.scenario.dim), witness, leaves, duals, omega, "", "", sol,
        ) if np.isfinite(sol.pobj) else RobustnessResult(
            self.kind, self.method, nan, nan, nan, "ADMM", "failed", "nan iterate",
            sol.iterations, nan, nan, nan, sol.solve_time, 0.0, nan)

    def _witness_coefficients(self, y: np.ndarray, keep: bool):
        """s_alpha = sum_j P_{j alpha} Tr(sigma_alpha Y_j): the witness read from the duals."""
        prob = self.problem
        dims = self.scenario.subsystem_dims
        slices, spaces = prob.block_slices(), prob.spaces()
        s = np.zeros(prob.leaf_particular.shape[1])
        for j in range(prob.n_blocks):
            s += prob.leaf_particular[j] * (prob.block_maps[j].T @ y[slices[j]])
        duals = None
        if keep:
            mats = [embed_identity(cone_to_matrix(y[sl], n, prob.fmt), dims, small,
                                   n / self.scenario.dim)
                    for sl, n, small in zip(slices, prob.cone_dims, spaces)]
            # every leaf of a merged block has that block's dual (same conditions, same cone)
            duals = tuple([mats[c] for c in prob.classes()] + mats[prob.n_blocks:])
        return s, duals

    def _primal_blocks(self, s: np.ndarray):
        prob = self.problem
        dims = self.scenario.subsystem_dims
        # cone_to_matrix returns the dual-pairing matrix; for a primal slack of the complex
        # format this is exactly the matrix itself (the real embeddings count it twice)
        half = 1.0 if prob.fmt == "scs_complex" else 0.5
        mats = [embed_identity(cone_to_matrix(s[sl], n, prob.fmt), dims, small, half)
                for sl, n, small in zip(prob.block_slices(), prob.cone_dims, prob.spaces())]
        classes = prob.classes()
        sizes = np.bincount(classes)
        # a merged block is split equally among its leaves (each part PSD, same conditions)
        leaves = tuple(mats[c] / sizes[c] for c in classes)
        omega = mats[prob.n_blocks] if self.kind == "generalized" else None
        return leaves, omega


@lru_cache(maxsize=32)
def get_problem(
    scenario: Scenario, kind: str, method: str, options: SolverOptions
) -> RobustnessProblem:
    """Cached :class:`RobustnessProblem` (one per worker process and configuration)."""
    return RobustnessProblem(scenario, kind, method, options)
