"""The task function: a pure top-level function from plain data to plain results.

``run_samples(spec_json, indices)`` rebuilds the plan from
:meth:`sweep.planning.plan.Plan.task_json` (cached per worker process, so files are read and
problems compiled once), computes every sample and returns one dict per sample.  It never raises for
a sample: an invalid operator is status ``invalid``, a failed solve ``failed``, any other exception
``error`` with its message.  The robustness SDPs of a task's samples are solved as one batch when
the back-end batches (the interior-point ``IPM``); each sample's arithmetic in a batch is its own
and every cold SCS solve gets a fresh workspace, so a sample's operator, seed, verdict and
robustness values do not depend on which task or worker computed it (unless ``compute.warm_start``
chains SCS solves within a task, which trades that for speed along grids).
"""

from __future__ import annotations

import os
import socket
import time
import warnings
from functools import lru_cache
from typing import Any

import numpy as np

from workers.analysis.certified import analyse_and_certify_many
from workers.analysis.robustness import get_problem
from workers.analysis.separability import analyse_many, methods_for
from workers.sdp.solvers import SolverOptions
from workers.operators.validity import check_validity, hermitian_part

from .plan import Plan, plan_from_task_json

NAN = float("nan")
FIELDS_FLOAT = ("min_eig", "r_random", "r_random_lo", "r_random_hi", "r_generalized",
                "r_generalized_lo", "r_generalized_hi", "margin", "res_pri", "res_dual", "gap",
                "solve_time_share", "game_value", "aux", "cert_margin")


@lru_cache(maxsize=4)
def plan_from_json(spec_json: str) -> Plan:
    """The plan of :meth:`sweep.planning.plan.Plan.task_json` (or of a plain spec JSON), cached."""
    return plan_from_task_json(spec_json)


def _worker_name() -> str:
    try:
        from distributed import get_worker
        return str(get_worker().name)
    except (ImportError, ValueError):
        return f"{socket.gethostname()}:{os.getpid()}"


def blank(index: int, point: int, rep: int) -> dict[str, Any]:
    row: dict[str, Any] = {f: NAN for f in FIELDS_FLOAT}
    row.update(index=index, point=point, rep=rep, status="ok", verdict="", valid=True,
               solver_status="", iterations=0, solve_batch=0, message="", worker=_worker_name(),
               operator=None, witness=None, certified=False, passes=0, certificate=None,
               cert_operator=None)
    return row


def _options(plan: Plan) -> SolverOptions:
    comp = plan.spec.compute
    return SolverOptions(solver=comp.solver, eps_abs=comp.eps, eps_rel=comp.eps,
                         max_iters=comp.max_iters, tol=comp.tol)


def _robustness_many(plan: Plan, Ws: list[np.ndarray], rows: list[dict[str, Any]]) -> None:
    """Robustness of several samples, the SDPs solved as one batch (see module doc)."""
    comp = plan.spec.compute
    opts = _options(plan)
    if comp.certify:
        done = analyse_and_certify_many(plan.scenario, Ws, tuple(comp.robustness), comp.method,
                                        opts, comp.second_pass, comp.force_solve,
                                        comp.warm_start)
    else:
        done = [(res, None) for res in analyse_many(
            plan.scenario, Ws, tuple(comp.robustness), comp.method, opts,
            force_solve=comp.force_solve, warm_start=comp.warm_start)]
    batched = sum(_batched(res) for res, _ in done)
    for W, row, (res, cv) in zip(Ws, rows, done):
        _record(comp, W, row, res, cv)
        row["solve_batch"] = batched if _batched(res) else (1 if _solves(res) else 0)


def _solves(res) -> list:
    """The SDP solves behind a sample's analysis (comb shortcuts are not solves)."""
    out = []
    for b in res.bounds.values():
        out += [b.lower_from] + ([] if b.exact else [b.upper_from])
    return [r for r in out if r.solver != "shortcut"]


def _batched(res) -> bool:
    """Whether the sample's solves were one batched interior-point call shared with the
    other samples of its task (the IPM splits the batch's time equally)."""
    return any(r.solver == "IPM" and not r.fallback_from for r in _solves(res))


def _record(comp, W: np.ndarray, row: dict[str, Any], res, cv) -> None:
    """Copy one sample's analysis (and certified verdict, if any) into its row."""
    if cv is not None:
        row.update(verdict=cv.verdict, certified=cv.certified, cert_margin=cv.margin,
                   passes=cv.passes, margin=res.margin,
                   message=f"{cv.reason} | solver: {res.reason}")
        if comp.store_certificates and cv.certificate is not None:
            row["certificate"] = cv.certificate.to_arrays()
            row["cert_operator"] = W
    else:
        row.update(verdict=res.verdict, margin=res.margin, message=res.reason)
    solves = []
    for kind, b in res.bounds.items():
        row[f"r_{kind}"] = NAN if b.value is None else b.value
        row[f"r_{kind}_lo"], row[f"r_{kind}_hi"] = b.lower, b.upper
        solves += [b.lower_from] + ([] if b.exact else [b.upper_from])
    deciding = res.witness_result()
    row.update(solver_status=deciding.status, iterations=deciding.iterations,
               res_pri=deciding.res_pri, res_dual=deciding.res_dual, gap=deciding.gap,
               solve_time_share=sum(r.solve_time for r in solves))
    if any(not r.ok for r in solves):
        row["status"] = "failed"
    if comp.store_witnesses and deciding.witness is not None:
        row["witness"] = deciding.witness


def _game(plan: Plan, index: int, W: np.ndarray, row: dict[str, Any]) -> None:
    from workers.games.causal_games import get_game
    from workers.games.seesaw import seesaw  # imports cvxpy (~1 s): only when a game is asked for
    g = plan.spec.compute.game
    dims = [(p.d_in, p.d_out) for p in plan.scenario.parties]
    seed = np.random.SeedSequence(plan.spec.compute.seed, spawn_key=(index, 1))
    with warnings.catch_warnings():  # inaccurate inner SDPs only lower the see-saw value
        warnings.simplefilter("ignore", UserWarning)
        row["game_value"] = seesaw(W, dims, get_game(g.name), n_starts=g.starts, seed=seed,
                                   max_iter=g.max_iter).value


def _prepare(plan: Plan, index: int) -> tuple[dict[str, Any], np.ndarray | None]:
    """The sample's row with its operator checked; the operator is None when the sample is
    already finished (invalid, or an error while building it)."""
    point, rep = plan.locate(index)
    row = blank(index, point, rep)
    comp = plan.spec.compute
    try:
        W, row["aux"] = plan.operator(index)
        if comp.store_operators:
            row["operator"] = W
        rep_v = check_validity(plan.scenario, W, tol=1e-7)
        row["min_eig"] = rep_v.min_eigenvalue
        if comp.validity and not rep_v.valid:
            row.update(status="invalid", valid=False, message="; ".join(rep_v.problems()))
            return row, None
        W = hermitian_part(W)  # float rounding leaves ~1e-17 asymmetry; exact checks need none
        if comp.store_operators:
            row["operator"] = W
        return row, W
    except Exception as exc:  # recorded as the sample's status, never aborts the sweep
        _error(row, exc)
        return row, None


def _error(row: dict[str, Any], exc: Exception) -> None:
    row.update(status="error", message=f"{type(exc).__name__}: {exc}"[:300])


def compute_sample(plan: Plan, index: int) -> dict[str, Any]:
    """All requested quantities of one sample (never raises)."""
    return compute_samples(plan, [index])[0]


def compute_samples(plan: Plan, indices: list[int]) -> list[dict[str, Any]]:
    """All requested quantities of several samples (never raises for a sample).

    The robustness SDPs of the samples are solved as one batch; if the batch raises, each
    sample is redone alone so that the exception is recorded on the sample that caused it.
    """
    comp = plan.spec.compute
    prepared = [_prepare(plan, int(i)) for i in indices]
    live = [(row, W) for row, W in prepared if W is not None]
    if comp.robustness and live:
        try:
            _robustness_many(plan, [W for _, W in live], [row for row, _ in live])
        except Exception:  # noqa: BLE001 - find the culprit sample by sample
            for row, W in live:
                try:
                    _robustness_many(plan, [W], [row])
                except Exception as exc:  # recorded as the sample's status
                    _error(row, exc)
    if comp.game is not None:
        for row, W in live:
            if row["status"] == "error":
                continue
            try:
                _game(plan, row["index"], W, row)
            except Exception as exc:  # recorded as the sample's status
                _error(row, exc)
    return [row for row, _ in prepared]


def warm_up(spec_json: str) -> str:
    """Build the plan and compile its robustness problems in this process (cached), so the
    first task does not pay for them; run on every worker while the cluster starts."""
    plan = plan_from_json(spec_json)
    comp = plan.spec.compute
    opts = _options(plan)
    for kind in comp.robustness:
        for method in methods_for(plan.scenario, comp.method):
            get_problem(plan.scenario, kind, method, opts)
    return _worker_name()


def run_samples(spec_json: str, indices: list[int]) -> list[dict[str, Any]]:
    """Compute the samples ``indices`` of the spec given as JSON (the dask task).

    Every row carries ``task_seconds``: the task's wall time over its number of samples
    (not stored per sample; the driver sums it into the run's provenance).
    """
    t0 = time.perf_counter()
    plan = plan_from_json(spec_json)
    rows = compute_samples(plan, [int(i) for i in indices])
    share = (time.perf_counter() - t0) / max(len(rows), 1)
    for row in rows:
        row["task_seconds"] = share
    return rows
