"""Before a run starts: the workers and their memory, the limits check against them and the
disk, and the dry run (:func:`dry_run`).  The estimates themselves are in
:mod:`sweep.execution.limits`."""

from __future__ import annotations

import math
import os
from pathlib import Path

from . import limits
from .clusters import expected_workers
from sweep.errors import UserError
from .monitor import Monitor
from sweep.planning.plan import Plan
from sweep.spec.model import Spec
from sweep.spec.run import RunSpec
from sweep.storage.disk import free_bytes
from sweep.storage.writer import ResultFile

MAX_AUTO_TASK = 32  # samples per task when the size is automatic: enough to batch the IPM
TASKS_PER_WORKER = 8  # ... and never so few tasks that the last ones leave workers idle


def auto_task_size(n_missing: int, run: RunSpec) -> int:
    """Samples per task when ``run.samples_per_task`` is unset: as large as useful for the
    batched solver (32) while leaving at least 8 tasks per worker for load balance."""
    if run.cluster == "serial":
        return MAX_AUTO_TASK
    workers = expected_workers(run)
    return max(1, min(MAX_AUTO_TASK, math.ceil(n_missing / (TASKS_PER_WORKER * workers))))


def workers_and_memory(run: RunSpec) -> tuple[int, float | None]:
    """Workers and the memory each may use, known before the cluster starts."""
    import psutil
    if run.cluster == "serial":
        return 1, float(psutil.virtual_memory().available)
    if run.cluster == "local":
        n = run.workers or os.cpu_count() or 1
        return n, psutil.virtual_memory().total / n
    if run.cluster == "jobqueue" and run.jobqueue is not None:
        from dask.utils import parse_bytes
        jq = run.jobqueue
        return jq.jobs * jq.processes, parse_bytes(jq.memory) / jq.processes
    if run.cluster == "allocation":
        return expected_workers(run), _allocation_memory()
    return 1, None  # address: known once connected


def _allocation_memory() -> float | None:
    """Memory per worker in a SLURM allocation: ``SLURM_MEM_PER_CPU`` (MB; one CPU per
    worker), else ``SLURM_MEM_PER_NODE`` over the tasks per node; None when not given."""
    env = os.environ
    if env.get("SLURM_MEM_PER_CPU", "").isdigit():
        return float(env["SLURM_MEM_PER_CPU"]) * 2**20
    per_node = env.get("SLURM_MEM_PER_NODE", "")
    tasks = env.get("SLURM_NTASKS_PER_NODE", "").split("(")[0] or env.get("SLURM_NTASKS", "")
    if per_node.isdigit() and tasks.isdigit() and int(tasks) > 0:
        return float(per_node) * 2**20 / int(tasks)
    return None


def check_limits(store: ResultFile, mon: Monitor, n_missing: int, workers: int,
                  memory: float | None) -> None:
    store.check_creation_space()
    try:
        free = float(free_bytes(store.existing_folder()))
    except OSError:
        free = None
    est, warnings = limits.check(store.plan, n_missing, workers, memory, free,
                                 repr(str(store.folder)))
    store.estimate = est
    for w in warnings:
        mon.note(w)


def check_address_limits(store: ResultFile, client, mon: Monitor) -> None:
    info = client.scheduler_info()["workers"].values()
    limits_ = [w.get("memory_limit") or 0 for w in info]
    memory = min(limits_) if limits_ and min(limits_) > 0 else None
    check_limits(store, mon, mon.total, max(len(limits_), 1), memory)


def dry_run(spec: Spec, out: str, run: RunSpec | None = None) -> dict:
    """What :func:`run_sweep` would do, without starting a cluster or touching ``out``:
    samples stored and to compute, tasks, the estimate and its warnings (a refusal raises
    the same one-line error the run would)."""
    from sweep.storage.results import read_results
    run = run or spec.run
    plan = Plan(spec)
    n_done = 0
    if Path(out).exists():
        attrs, samples, _ = read_results(out)
        if attrs["spec_hash"] != plan.spec_hash():
            raise UserError(f"output {out!r} holds a different spec (hash "
                            f"{attrs['spec_hash'][:12]}, this spec {plan.spec_hash()[:12]}); "
                            "expected the same spec to resume, or choose another -o path")
        n_done = len(set(samples["index"].tolist()))
    n_missing = plan.n_samples - n_done
    workers, memory = workers_and_memory(run)
    folder = Path(out).absolute().parent
    while not folder.exists():
        folder = folder.parent
    est, warnings = limits.check(plan, n_missing, workers, memory, float(free_bytes(folder)),
                                 repr(str(folder)))
    per_task = run.samples_per_task or auto_task_size(n_missing, run)
    return {"n_samples": plan.n_samples, "stored": n_done, "to_compute": n_missing,
            "tasks": math.ceil(n_missing / per_task), "samples_per_task": per_task,
            "workers": workers, "estimate": None if est is None else est.describe(),
            "warnings": warnings}
