"""Running a sweep on dask (clients from :mod:`sweep.clusters`): submission, progress, resume.

The driver is the only process that touches the HDF5 file.  Tasks are
:func:`sweep.task.run_samples` calls on plain data (the spec as JSON and a list of sample
indices), submitted with ``pure=False`` and unique keys; results are appended as they arrive.
A worker that dies has its tasks re-run by dask; a sample already stored is never written
twice.  Ctrl-C cancels the outstanding tasks, closes the file and re-raises: rerunning the
same command resumes.
"""

from __future__ import annotations

import contextlib
import math
import sys
import time
import uuid
from dataclasses import dataclass
from typing import Iterator, TextIO

from .clusters import expected_workers, open_client
from .plan import Plan
from .spec import Spec
from .spec_run import RunSpec
from .storage import ResultFile
from .task import run_samples


@dataclass(frozen=True)
class SweepOutcome:
    """What a call to :func:`run_sweep` did, with where the time went (seconds).

    ``startup``: getting the cluster and client ready (0 in serial); ``compute``: from the
    first task submitted to the last result stored; ``storage``: spent writing the HDF5
    file; ``task_seconds``: the tasks' own wall time, summed over tasks (with one worker,
    ``compute - task_seconds`` is the scheduling and storage overhead).
    """

    path: str
    n_samples: int
    already_done: int
    computed: int
    elapsed: float
    startup: float = 0.0
    compute: float = 0.0
    storage: float = 0.0
    task_seconds: float = 0.0


class Progress:
    """A one-line text progress bar with rate and ETA (stderr)."""

    def __init__(self, total: int, enabled: bool, stream: TextIO | None = None) -> None:
        self.total, self.enabled, self.stream = total, enabled, stream or sys.stderr
        self.done, self.t0, self.last = 0, time.monotonic(), 0.0

    def update(self, n: int) -> None:
        self.done += n
        t = time.monotonic()
        if self.enabled and (t - self.last > 0.2 or self.done >= self.total):
            self.last = t
            rate = self.done / max(t - self.t0, 1e-9)
            eta = (self.total - self.done) / rate if rate > 0 else float("inf")
            width = 30
            fill = int(width * self.done / max(self.total, 1))
            self.stream.write(f"\r[{'#' * fill}{'.' * (width - fill)}] {self.done}/{self.total}"
                              f"  {rate:.1f} samples/s  ETA {eta:.0f} s ")
            self.stream.flush()

    def close(self) -> None:
        if self.enabled and self.total:
            self.stream.write("\n")


def _submit_all(client, spec_json: str, tasks: list[list[int]]):
    tag = uuid.uuid4().hex[:8]
    return [client.submit(run_samples, spec_json, t, pure=False,
                          key=f"orderless-{tag}-{t[0]}-{t[-1]}") for t in tasks]


def _run_dask(store: ResultFile, spec_json: str, tasks, run: RunSpec, bar: Progress) -> None:
    from distributed import as_completed
    t0 = time.monotonic()
    with open_client(run, spec_json) as client:  # workers warmed up as they join
        store.run_entry["startup_s"] = round(time.monotonic() - t0, 3)
        with _compute_phase(store):
            futures = _submit_all(client, spec_json, tasks)
            try:
                for fut in as_completed(futures):
                    rows = fut.result()
                    bar.update(store.append(rows))
                    fut.release()
            except BaseException:
                client.cancel(futures)
                raise


def _run_serial(store: ResultFile, spec_json: str, tasks, bar: Progress) -> None:
    with _compute_phase(store):
        for t in tasks:
            bar.update(store.append(run_samples(spec_json, t)))


@contextlib.contextmanager
def _compute_phase(store: ResultFile) -> Iterator[None]:
    """Record in the run entry the seconds from the first task submitted to the last result
    stored (``compute_s``; the cluster's start-up and shut-down are not in it)."""
    t0 = time.monotonic()
    try:
        yield
    finally:
        store.run_entry["compute_s"] = round(time.monotonic() - t0, 3)


MAX_AUTO_TASK = 32  # samples per task when the size is automatic: enough to batch the IPM
TASKS_PER_WORKER = 8  # ... and never so few tasks that the last ones leave workers idle


def auto_task_size(n_missing: int, run: RunSpec) -> int:
    """Samples per task when ``run.samples_per_task`` is unset: as large as useful for the
    batched solver (32) while leaving at least 8 tasks per worker for load balance."""
    if run.cluster == "serial":
        return MAX_AUTO_TASK
    workers = expected_workers(run)
    return max(1, min(MAX_AUTO_TASK, math.ceil(n_missing / (TASKS_PER_WORKER * workers))))


def run_sweep(spec: Spec, out: str, run: RunSpec | None = None) -> SweepOutcome:
    """Compute every sample of ``spec`` missing from ``out`` on the cluster ``run``."""
    run = run or spec.run
    plan = Plan(spec)
    t0 = time.monotonic()
    with ResultFile(out, plan) as store:
        done = store.done_indices()
        missing = [i for i in range(plan.n_samples) if i not in done]
        tasks = plan.tasks(missing, run.samples_per_task or auto_task_size(len(missing), run))
        bar = Progress(len(missing), run.progress)
        store.start_run(run.cluster)
        state = "interrupted"
        try:
            if tasks:
                spec_json = spec.model_dump_json()
                if run.cluster == "serial":
                    _run_serial(store, spec_json, tasks, bar)
                else:
                    _run_dask(store, spec_json, tasks, run, bar)
            state = "complete"
        finally:
            bar.close()
            store.finish(state)
        e = store.run_entry
    return SweepOutcome(str(out), plan.n_samples, len(done), e["computed"],
                        time.monotonic() - t0, e.get("startup_s", 0.0), e.get("compute_s", 0.0),
                        e["storage_s"], e["task_s"])
