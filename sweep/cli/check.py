"""``orderless check W.npy --dims ...``: validity, verdict, robustness and witness of one operator."""

from __future__ import annotations

import argparse
import json
import math

import numpy as np

from workers.operators.scenario import Scenario
from workers.analysis.certified import SECOND_PASS_MODES
from workers.sdp.solvers import SolverOptions
from workers.operators.validity import check_validity, hermitian_part

from .check_steps import analyse_and_certify_steps, announcer
from sweep.errors import UserError
from sweep.planning.operator_files import parse_dims, read_operator


def register(sub: argparse._SubParsersAction) -> None:
    p = sub.add_parser(
        "check",
        help="check one process operator: validity, causal separability, robustness, witness",
        description=(
            "Subsystem order of the operator: P (global past) first, then each party's input "
            "and output in party order, then F (global future) last."),
    )
    p.add_argument("operator", help=".npy file (read without pickle) or a plain-text matrix")
    p.add_argument("--dims", required=True,
                   help="input then output dimension of each party, e.g. 2,2,2,2")
    p.add_argument("--past", type=int, default=1, metavar="D", help="dimension of P (default 1)")
    p.add_argument("--future", type=int, default=1, metavar="D",
                   help="dimension of F (default 1)")
    p.add_argument("--names", default=None, help="party names, comma-separated (default A,B,..)")
    p.add_argument("--quantities", default="random,generalized",
                   help="robustness measures: random, generalized (default both)")
    p.add_argument("--method", default="auto",
                   choices=["auto", "exact", "bounds", "sufficient", "necessary", "fixed_orders"],
                   help="characterisation (auto: exact for N<=3, both bounds for N>=4)")
    p.add_argument("--solver", default="AUTO", type=str.upper,
                   choices=["AUTO", "IPM", "SCS", "CLARABEL", "ADMM"],
                   help="SDP back-end (AUTO: the batched interior point for small problems, "
                        "the matrix-free ADMM for very large ones, else SCS)")
    p.add_argument("--eps", type=float, default=1e-8, help="solver tolerance (abs and rel)")
    p.add_argument("--max-iters", type=int, default=200_000)
    p.add_argument("--tol", type=float, default=1e-6,
                   help="decision threshold on the robustness (default 1e-6)")
    p.add_argument("--second-pass", default="auto", choices=list(SECOND_PASS_MODES),
                   help="re-solve an uncertified verdict: auto (Clarabel up to 32x32, else "
                        "SCS at 100x tighter eps), clarabel, tight, none")
    p.add_argument("--force-solve", action="store_true",
                   help="solve the SDPs even when the operator is recognised as a comb")
    p.add_argument("--game", default=None,
                   help="also compute the best see-saw value of a built-in causal game")
    p.add_argument("--seesaw-starts", type=int, default=5)
    p.add_argument("--seed", type=int, default=0, help="seed of the see-saw starts")
    p.add_argument("--json", action="store_true", help="print one JSON object")
    p.add_argument("--quiet", action="store_true", help="no step lines on stderr (shown on a "
                   "terminal, or when the check is estimated to take over 10 s)")
    p.set_defaults(func=run)


def scenario_from_args(args: argparse.Namespace) -> Scenario:
    dims = parse_dims(args.dims)
    names = None
    if args.names:
        names = [n.strip() for n in args.names.split(",")]
        if len(names) != len(dims) // 2:
            raise UserError(f"--names={args.names!r} has {len(names)} names, --dims describes "
                            f"{len(dims) // 2} parties")
    for flag, v in (("--past", args.past), ("--future", args.future)):
        if v < 1:
            raise UserError(f"{flag}={v}: expected an integer >= 1")
    try:
        return Scenario.from_dims(dims, args.past, args.future, names)
    except ValueError as exc:
        raise UserError(str(exc)) from None


def options_from_args(args: argparse.Namespace) -> SolverOptions:
    try:
        return SolverOptions(solver=args.solver.upper(), eps_abs=args.eps, eps_rel=args.eps,
                             max_iters=args.max_iters, tol=args.tol)
    except ValueError as exc:
        raise UserError(str(exc)) from None


def _quantities(text: str) -> tuple[str, ...]:
    qs = tuple(q.strip() for q in text.split(",") if q.strip())
    bad = [q for q in qs if q not in ("random", "generalized")]
    if bad or not qs:
        raise UserError(f"--quantities={text!r}: expected random, generalized or both")
    return qs


def _finite(x: float | None) -> float | None:
    return None if x is None or not math.isfinite(x) else float(x)


def check_report(scenario: Scenario, W: np.ndarray, options: SolverOptions,
                 quantities: tuple[str, ...], method: str, second_pass: str = "auto",
                 force_solve: bool = False, say=lambda text: None) -> dict:
    """Everything ``check`` prints, as a JSON-ready dict (raises UserError if W is invalid).

    The verdict is the certified one: a solver verdict whose certificate does not verify
    (after the second pass) is reported as ``undecided``.  ``say`` receives a line as each
    step starts (:mod:`sweep.cli.check_steps`).
    """
    W = _validated(scenario, W)
    res, cv = analyse_and_certify_steps(scenario, W, quantities, method, options, second_pass,
                                        force_solve, say)
    out: dict = {"valid": True, "scenario": scenario.describe(),
                 "dims": list(scenario.subsystem_dims), "verdict": cv.verdict,
                 "certified": bool(cv.certified), "certificate_margin": _finite(cv.margin),
                 "certificate_kind": cv.certificate.kind if cv.certificate else None,
                 "certificate_reason": cv.reason, "passes": cv.passes,
                 "solver_verdict": res.verdict, "margin": _finite(res.margin),
                 "reason": res.reason, "methods": list(res.methods)}
    for kind in ("random", "generalized"):
        b = res.bounds.get(kind)
        out[f"{kind}_robustness"] = None if b is None else _finite(b.value)
        if b is not None and not b.exact:
            out[f"{kind}_robustness_bounds"] = [_finite(max(b.lower, 0.0)), _finite(b.upper_from.value)]
    wres = res.witness_result()
    out["witness_value"] = _finite(wres.witness_value) if wres is not None else None
    solves = [r for b in res.bounds.values() for r in {id(b.lower_from): b.lower_from,
                                                       id(b.upper_from): b.upper_from}.values()]
    out["solver"] = wres.solver if wres is not None else options.solver
    out["status"] = _worst_status([r.status for r in solves])
    out["solves"] = [{
        "kind": r.kind, "method": r.method, "solver": r.solver, "status": r.status,
        "raw_status": r.raw_status, "iterations": r.iterations, "lower_bound": _finite(r.lower_bound),
        "upper_bound": _finite(r.upper_bound), "res_pri": _finite(r.res_pri),
        "res_dual": _finite(r.res_dual), "gap": _finite(r.gap), "solve_time": r.solve_time,
        "fallback_from": r.fallback_from, "message": r.message} for r in solves]
    out["tolerances"] = {"eps_abs": options.eps_abs, "eps_rel": options.eps_rel, "tol": options.tol}
    return out


def _worst_status(statuses: list[str]) -> str:
    order = ["error", "failed", "infeasible", "unbounded", "time_limit", "iteration_limit",
             "optimal_inaccurate", "optimal"]
    return min(statuses, key=lambda s: order.index(s) if s in order else 0)


def _validated(scenario: Scenario, W: np.ndarray) -> np.ndarray:
    D = scenario.dim
    if W.shape != (D, D):
        raise UserError(f"dims={list(scenario.subsystem_dims)} (P, parties' inputs/outputs, F) "
                        f"multiply to {D} but the operator is {W.shape[0]}x{W.shape[1]}")
    rep = check_validity(scenario, W)
    if not rep.hermitian:
        raise UserError(f"operator is not Hermitian (relative residual "
                        f"{rep.hermiticity_residual:.2e})")
    if not rep.valid:
        raise UserError("operator is not a valid process: " + "; ".join(rep.problems()))
    return hermitian_part(W)


def add_game(out: dict, scenario: Scenario, W: np.ndarray, name: str, starts: int,
             seed: int) -> None:
    """Add ``game_value``, ``causal_bound`` and ``violates`` for a built-in game."""
    from workers.games.causal_bound import causal_bound
    from workers.games.causal_games import get_game
    from workers.games.seesaw import seesaw

    try:
        game = get_game(name)
    except ValueError as exc:
        raise UserError(f"--game: {exc}") from None
    if scenario.d_past > 1 or scenario.d_future > 1:
        raise UserError("--game: games are defined for scenarios without global past/future")
    if game.n_parties != scenario.n_parties:
        raise UserError(f"--game={name!r} has {game.n_parties} parties, the operator "
                        f"{scenario.n_parties}")
    dims = [(p.d_in, p.d_out) for p in scenario.parties]
    sv = seesaw(W, dims, game, n_starts=starts, seed=seed)
    cb = causal_bound(game)
    out.update(game=name, game_value=float(sv.value), causal_bound=float(cb.value),
               violates=bool(sv.value > cb.value + 1e-6), seesaw_starts=starts,
               seesaw_converged=bool(sv.converged))


def run(args: argparse.Namespace) -> int:
    scenario = scenario_from_args(args)
    options = options_from_args(args)
    quantities = _quantities(args.quantities)
    W = read_operator(args.operator)
    try:
        _validated(scenario, W)  # bad input is one line, before any step line
        say = announcer(args.quiet, scenario, quantities, args.method, options)
        out = check_report(scenario, W, options, quantities, args.method, args.second_pass,
                           args.force_solve, say)
    except UserError as exc:
        if args.json:
            print(json.dumps({"valid": False, "error": str(exc)}))
        raise
    except ValueError as exc:
        raise UserError(str(exc)) from None
    if args.game:
        add_game(out, scenario, hermitian_part(W), args.game, args.seesaw_starts, args.seed)
    print(json.dumps(out, indent=2) if args.json else render(out))
    return 0


def render(out: dict) -> str:
    """Human-readable report."""
    lines = [f"scenario       {out['scenario']}", "valid          yes",
             f"verdict        {out['verdict']}  ("
             + ("certified" if out["certified"] else "not certified")
             + f", certificate margin {_fmt(out['certificate_margin'])})",
             f"certificate    {out['certificate_reason']}",
             f"solver         {out['solver_verdict']} (margin {_fmt(out['margin'])}): "
             f"{out['reason']}"]
    for kind in ("random", "generalized"):
        key = f"{kind}_robustness"
        if f"{key}_bounds" in out:
            lo, up = out[f"{key}_bounds"]
            lines.append(f"{kind:<14} robustness in [{_fmt(lo)}, {_fmt(up)}]")
        elif out.get(key) is not None:
            lines.append(f"{kind:<14} robustness {_fmt(out[key])}")
    lines.append(f"witness        Tr(S W) = {_fmt(out['witness_value'])}")
    for s in out["solves"]:
        fb = f", fallback from {s['fallback_from']}" if s["fallback_from"] else ""
        lines.append(f"solve          {s['kind']}/{s['method']}: {s['solver']} {s['status']}, "
                     f"{s['iterations']} it, res {_fmt(s['res_pri'])}/{_fmt(s['res_dual'])}, "
                     f"gap {_fmt(s['gap'])}, {s['solve_time']:.3f} s{fb}")
    if "game" in out:
        lines.append(f"game           {out['game']}: see-saw value {out['game_value']:.6f}, "
                     f"causal bound {out['causal_bound']:.6f}, violates: "
                     f"{'yes' if out['violates'] else 'no'}")
    return "\n".join(lines)


def _fmt(x: float | None) -> str:
    return "n/a" if x is None else f"{x:.6g}"
