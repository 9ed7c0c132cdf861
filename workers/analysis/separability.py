"""Causal separability verdicts from robustness solves, with the margin that decided them.

A process is causally separable iff its random robustness is 0 (the white-noise process is
in the interior of the separable set; Araujo et al., NJP 17, 102001 (2015)).  The verdict is
taken from the random robustness when it is computed, else from the generalised one:

* ``nonseparable`` when the solver's *lower* bound exceeds ``tol + accuracy``;
* ``separable`` when its *upper* bound is below ``tol - accuracy``;
* ``undecided`` otherwise, with the reason (solver failure, margin inside the accuracy, or,
  for N >= 4, a value between the necessary and the sufficient bound).

For N <= 3 the exact characterisation is used.  For N >= 4 the robustness with respect to the
``necessary`` set is a lower bound and with respect to the ``sufficient`` set an upper bound
on the true robustness (Wechs, Abbott, Branciard, NJP 21, 013027 (2019)).
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from .robustness import RobustnessResult, get_problem
from workers.operators.scenario import Scenario
from .shortcuts import try_comb_shortcut
from workers.sdp.solvers import SolverOptions
from .symmetric_robustness import get_symmetric_problem
from workers.sdp.symmetry import find_local_symmetry, may_be_symmetric

VERDICTS = ("separable", "nonseparable", "undecided")
QUANTITIES = ("random", "generalized")


@dataclass(frozen=True)
class Bounds:
    """Lower and upper bound on one robustness, and the results they came from."""

    kind: str
    lower: float
    upper: float
    lower_from: RobustnessResult
    upper_from: RobustnessResult

    @property
    def exact(self) -> bool:
        return self.lower_from is self.upper_from

    @property
    def value(self) -> float | None:
        """The robustness when the characterisation is exact, else None."""
        return self.upper_from.value if self.exact else None


@dataclass(frozen=True)
class SeparabilityResult:
    """Verdict, margin, reason and every robustness solve behind them."""

    verdict: str
    margin: float
    reason: str
    methods: tuple[str, ...]
    bounds: dict[str, Bounds] = field(repr=False)

    def robustness(self, kind: str) -> float | None:
        b = self.bounds.get(kind)
        return None if b is None else b.value

    def witness_result(self) -> RobustnessResult | None:
        """The solve whose dual certifies nonseparability (the lower-bound side)."""
        for kind in QUANTITIES:
            if kind in self.bounds:
                return self.bounds[kind].lower_from
        return None


def methods_for(scenario: Scenario, method: str) -> tuple[str, ...]:
    """Structures to solve for ``method`` ('auto' picks exact, or both bounds for N >= 4)."""
    if method == "auto":
        return ("exact",) if scenario.n_parties <= 3 else ("necessary", "sufficient")
    if method == "bounds":
        return ("necessary", "sufficient")
    return (method,)


def _bounds(kind: str, results: dict[str, RobustnessResult]) -> Bounds:
    if "exact" in results:
        r = results["exact"]
        return Bounds(kind, r.lower_bound, r.upper_bound, r, r)
    low = results.get("necessary") or results.get("exact")
    up = results.get("sufficient") or results.get("fixed_orders") or low
    low = low or up
    return Bounds(kind, low.lower_bound, up.upper_bound, low, up)


def decide(b: Bounds, tol: float) -> tuple[str, float, str]:
    """Verdict, margin and reason from bounds on a robustness."""
    lo, up = b.lower_from, b.upper_from
    for r in (lo, up):
        if not r.ok:
            return "undecided", float("nan"), f"{r.method} solve failed: {r.solver} {r.status}"
    acc_lo = lo.accuracy if np.isfinite(lo.accuracy) else 0.0
    acc_up = up.accuracy if np.isfinite(up.accuracy) else 0.0
    if b.lower > tol + acc_lo:
        return "nonseparable", b.lower - tol - acc_lo, (
            f"{b.kind} robustness >= {b.lower:.3e} ({lo.method}) exceeds tol {tol:.1e} "
            f"+ accuracy {acc_lo:.1e}")
    if b.upper < tol - acc_up:
        return "separable", tol - acc_up - b.upper, (
            f"{b.kind} robustness <= {b.upper:.3e} ({up.method}) is below tol {tol:.1e} "
            f"- accuracy {acc_up:.1e}")
    if not b.exact and b.lower <= tol + acc_lo and b.upper >= tol - acc_up:
        gap_reason = "between the bounds" if b.upper > tol + acc_up else "inside the accuracy"
        return "undecided", 0.0, (
            f"{b.kind} robustness in [{b.lower:.3e}, {b.upper:.3e}] ({lo.method} .. "
            f"{up.method}): {gap_reason}")
    return "undecided", 0.0, (
        f"{b.kind} robustness in [{b.lower:.3e}, {b.upper:.3e}] is within tol {tol:.1e} "
        f"+/- solver accuracy")


def _symmetries(scenario: Scenario, Ws, todo: list[int], options: SolverOptions) -> dict:
    """The local symmetry algebra of each process to solve (None where it has none)."""
    if not options.symmetry or not todo:
        return {}
    dims = scenario.subsystem_dims
    maybe = may_be_symmetric(dims, [Ws[i] for i in todo])
    return {i: find_local_symmetry(dims, Ws[i]) for i, m in zip(todo, maybe) if m}


def _solve_all(scenario: Scenario, kind: str, method: str, options: SolverOptions, Ws,
               todo: list[int], keep: bool, warm_start: bool,
               start: dict[int, RobustnessResult] | None = None,
               syms: dict | None = None) -> dict[int, RobustnessResult]:
    """Solve ``Ws[i]`` for i in todo: processes with a local symmetry (``syms``) in the
    commutant of their symmetry group (one compiled problem per symmetry algebra), the rest
    as one batch.  ``start`` (the necessary bound's results) starts a matrix-free
    sufficient solve."""
    groups: dict = {}
    for i in todo:
        sym = (syms or {}).get(i)
        prob = get_symmetric_problem(scenario, kind, method, options, sym) if sym else None
        groups.setdefault(prob, []).append(i)
    out: dict[int, RobustnessResult] = {}
    for prob, idx in groups.items():
        batch = [Ws[i] for i in idx]
        if prob is None:
            res = get_problem(scenario, kind, method, options).solve_many(
                batch, keep_certificate=keep, warm_start=warm_start,
                start=[start[i] for i in idx] if start else None)
        else:
            res = prob.solve_many(batch, keep_certificate=keep, warm_start=warm_start)
        out.update(zip(idx, res))
    return out


def analyse(
    scenario: Scenario,
    W: np.ndarray,
    quantities: tuple[str, ...] = QUANTITIES,
    method: str = "auto",
    options: SolverOptions = SolverOptions(),
    keep_certificate: bool = False,
    force_solve: bool = False,
) -> SeparabilityResult:
    """Decide causal separability of W and compute the requested robustness measures.

    Parameters
    ----------
    scenario, W
        The scenario and a (valid) process operator in its subsystem order.
    quantities
        Any of ``"random"``, ``"generalized"``.
    method
        ``"auto"`` (exact for N <= 3, necessary + sufficient bounds for N >= 4), ``"bounds"``,
        or one structure of :data:`workers.structures.causal.METHODS`.
    options
        Solver choice, tolerances and the decision threshold ``tol``.
    force_solve
        Solve the SDPs even when W is recognised as a comb (:mod:`workers.analysis.shortcuts`).
    """
    return analyse_many(scenario, [W], quantities, method, options, keep_certificate,
                        force_solve)[0]


def analyse_many(
    scenario: Scenario,
    Ws,
    quantities: tuple[str, ...] = QUANTITIES,
    method: str = "auto",
    options: SolverOptions = SolverOptions(),
    keep_certificate: bool = False,
    force_solve: bool = False,
    warm_start: bool = False,
) -> list[SeparabilityResult]:
    """:func:`analyse` for several processes of one scenario, the SDPs solved as one batch
    per (quantity, structure) where the back-end batches (the IPM); same results as
    :func:`analyse` on each W.  ``warm_start`` chains warm-started SCS solves in the order
    of ``Ws`` instead (:meth:`workers.analysis.robustness.RobustnessProblem.solve_many`)."""
    bad = [q for q in quantities if q not in QUANTITIES]
    if bad or not quantities:
        raise ValueError(f"quantities={list(quantities)}, expected a non-empty subset of "
                         f"{list(QUANTITIES)}")
    methods = methods_for(scenario, method)
    known = [None if force_solve else try_comb_shortcut(scenario, W, tuple(quantities), methods)
             for W in Ws]
    todo = [i for i, k in enumerate(known) if k is None]
    solved: dict = {}
    syms = _symmetries(scenario, Ws, todo, options)
    for kind in quantities if todo else ():
        for m in methods:  # the sufficient bound starts where the necessary one ended
            prev = solved.get((kind, "necessary")) if m == "sufficient" else None
            solved[(kind, m)] = _solve_all(scenario, kind, m, options, Ws, todo,
                                           keep_certificate, warm_start, prev, syms)
    out = []
    for i in range(len(Ws)):
        bounds = {}
        for kind in quantities:
            res = known[i][kind] if known[i] is not None else {
                m: solved[(kind, m)][i] for m in methods}
            bounds[kind] = _bounds(kind, res)
        deciding = bounds["random"] if "random" in bounds else bounds[quantities[0]]
        verdict, margin, reason = decide(deciding, options.tol)
        out.append(SeparabilityResult(verdict, margin, reason, methods, bounds))
    return out
