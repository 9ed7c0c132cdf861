"""Running a sweep on dask (clients from :mod:`sweep.execution.clusters`): submission, progress,
resume.

The driver is the only process that touches the HDF5 file.  Tasks are
:func:`sweep.planning.task.run_samples` calls on plain data
(:meth:`sweep.planning.plan.Plan.task_json` and a list of sample indices), submitted with
``pure=False`` and unique keys, at most a window of them at a time (the task lists are generated
lazily); results are appended as they arrive. A worker that dies has its tasks re-run by dask; a
sample already stored is never written twice.

How a run ends, always with the data kept and the run's state recorded (in the file's
``runs`` and in the progress file): ``complete``; ``interrupted`` by Ctrl-C (outstanding
tasks cancelled, local workers ignore the terminal's SIGINT so only one line is printed);
``terminated`` by SIGTERM or SIGHUP (:class:`sweep.errors.RunStopped`); ``failed`` with a
one-line :class:`sweep.errors.UserError` or :class:`sweep.errors.EnvironmentFault` (disk
full, lost scheduler, a task that kills its workers).  A run that fails before its first
result leaves no new file behind.  Rerunning the same command resumes.
"""

from __future__ import annotations

import contextlib
import math
import os
import time
import uuid
from concurrent.futures import CancelledError
from dataclasses import dataclass
from typing import Iterable, Iterator

from .clusters import expected_workers, open_client, warm_up_workers
from sweep.errors import EnvironmentFault, RunStopped, UserError
from .monitor import Monitor
from sweep.planning.plan import Plan, missing_indices
from .preflight import (auto_task_size, check_address_limits, check_limits,  # noqa: F401
                        workers_and_memory)
from sweep.storage.progress import ProgressFile
from .signals import RunSignals
from sweep.spec.model import Spec
from sweep.spec.run import RunSpec
from sweep.storage.writer import ResultFile
from sweep.planning.task import run_samples, warm_up


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


WINDOW_PER_THREAD = 4  # tasks submitted ahead per worker thread (the rest wait in the driver)


def _kept(store: ResultFile) -> str:
    return f"{store.n_done} of {store.plan.n_samples} samples are stored in {str(store.path)!r}"


def _task_failure(exc: Exception, client, run: RunSpec, store: ResultFile) -> UserError:
    """The one-line error for a task that did not return rows (or a cluster call that
    failed)."""
    from distributed import KilledWorker
    if isinstance(exc, UserError):
        return exc
    if isinstance(exc, KilledWorker):
        return EnvironmentFault(f"workers kept dying while running a task (out of memory, or "
                                f"killed?): {str(exc).splitlines()[0][:160]}; {_kept(store)}: "
                                "check the workers' memory and logs, then rerun the same "
                                "command to resume")
    lost = getattr(client, "status", "running") != "running"
    if lost or isinstance(exc, (CancelledError, OSError, TimeoutError)):
        where = f"at {run.address}" if run.cluster == "address" else "of the cluster"
        return EnvironmentFault(f"lost the dask scheduler {where} "
                                f"({type(exc).__name__}); {_kept(store)}: restart the scheduler "
                                "and its workers, then rerun the same command to resume")
    return EnvironmentFault(f"a task failed on a worker ({type(exc).__name__}: "
                            f"{str(exc).splitlines()[0][:150] if str(exc) else ''}); "
                            f"{_kept(store)}; rerun the same command to resume")


def _store_rows(store: ResultFile, mon: Monitor, sig: RunSignals, rows: list) -> None:
    with sig.critical():
        mon.add(rows, store.append(rows))


def _started(store: ResultFile, run: RunSpec, mon: Monitor) -> None:
    """The cluster is ready: create the file (if new) and record the run."""
    store.create()
    store.start_run(run.cluster)
    if mon.file is not None:
        mon.file.write(run_id=store.run_entry["id"], stored=store.n_done)


def _run_dask(store: ResultFile, task_json: str, tasks: Iterable[list[int]], run: RunSpec,
              mon: Monitor, sig: RunSignals, n_tasks: int) -> None:
    from distributed import as_completed
    t0 = time.monotonic()
    with contextlib.ExitStack() as stack:
        stack.enter_context(_dask_logs())
        mon.phase("starting cluster", _describe(run))
        with sig.children_ignore_ctrl_c(run.cluster == "local"), _worker_setup(run):
            client = stack.enter_context(open_client(run))
        try:
            if run.cluster == "address":  # before anything is compiled on those workers
                check_address_limits(store, client, mon)
            mon.phase("compiling", "robustness problems on every worker (and on workers that "
                      "join later)")
            warm_up_workers(client, task_json)
            threads = sum(w.get("nthreads", 1)
                          for w in client.scheduler_info()["workers"].values())
        except (OSError, TimeoutError, CancelledError) as exc:  # the scheduler went away
            _quiet_dask()
            raise _task_failure(exc, client, run, store) from None
        startup = round(time.monotonic() - t0, 3)
        _started(store, run, mon)
        store.run_entry["startup_s"] = startup
        window = max(WINDOW_PER_THREAD * max(threads, 1), 8)
        tag = uuid.uuid4().hex[:8]
        it = iter(tasks)

        def submit() -> object | None:
            t = next(it, None)
            return None if t is None else client.submit(
                run_samples, task_json, t, pure=False, key=f"orderless-{tag}-{t[0]}-{t[-1]}")

        first = [f for f in (submit() for _ in range(window)) if f is not None]
        pending = set(first)
        with _compute_phase(store):
            mon.solving(n_tasks)
            ac = as_completed(first)
            try:
                for fut in ac:
                    pending.discard(fut)
                    try:
                        rows = fut.result()
                    except Exception as exc:  # noqa: BLE001 - becomes one line
                        raise _task_failure(exc, client, run, store) from None
                    _store_rows(store, mon, sig, rows)
                    fut.release()
                    nxt = submit()
                    if nxt is not None:
                        pending.add(nxt)
                        ac.add(nxt)
            except BaseException:
                _quiet_dask()
                if run.cluster != "local" and client.status == "running" and pending:
                    with contextlib.suppress(Exception):
                        client.cancel(list(pending))  # external workers stop computing them
                raise


def _run_serial(store: ResultFile, task_json: str, tasks: Iterable[list[int]], run: RunSpec,
                mon: Monitor, sig: RunSignals, n_tasks: int) -> None:
    mon.phase("compiling", "robustness problems in this process")
    warm_up(task_json)
    _started(store, run, mon)
    with _compute_phase(store):
        mon.solving(n_tasks)
        for t in tasks:
            _store_rows(store, mon, sig, run_samples(task_json, t))


def _quiet_dask() -> None:
    """A run that stops reports it in one line: dask's own warnings while the cluster shuts
    down after that (workers still busy, connections lost) would only bury it."""
    import logging
    logging.getLogger("distributed").setLevel(logging.CRITICAL)


@contextlib.contextmanager
def _dask_logs() -> Iterator[None]:
    """The client's error logs (a lost scheduler: a traceback per reconnection attempt) are
    off during a run, which turns every such fault into its one line; dask's log levels are
    restored when the cluster is closed."""
    import logging
    loggers = [logging.getLogger(n) for n in ("distributed", "distributed.client")]
    levels = [lg.level for lg in loggers]
    loggers[1].setLevel(logging.CRITICAL)
    try:
        yield
    finally:
        for lg, level in zip(loggers, levels):
            lg.setLevel(level)


@contextlib.contextmanager
def _worker_setup(run: RunSpec) -> Iterator[None]:
    """Local workers load :mod:`sweep.execution.worker_setup` at start (also after a restart)."""
    if run.cluster != "local":
        yield
        return
    import dask
    with dask.config.set({"distributed.worker.preload": ["sweep.execution.worker_setup"]}):
        yield


def _describe(run: RunSpec) -> str:
    if run.cluster == "local":
        return f"local, {run.workers or os.cpu_count() or 1} worker processes"
    if run.cluster == "address":
        return f"scheduler {run.address}"
    if run.cluster == "allocation":
        return f"SLURM allocation, {expected_workers(run)} srun worker(s)"
    jq = run.jobqueue
    return f"{jq.system} batch queue, {jq.jobs} job(s) x {jq.processes} worker(s)"


@contextlib.contextmanager
def _compute_phase(store: ResultFile) -> Iterator[None]:
    """Record in the run entry the seconds from the first task submitted to the last result
    stored (``compute_s``; the cluster's start-up and shut-down are not in it)."""
    t0 = time.monotonic()
    try:
        yield
    finally:
        if store.run_entry is not None:
            store.run_entry["compute_s"] = round(time.monotonic() - t0, 3)


def run_sweep(spec: Spec, out: str, run: RunSpec | None = None) -> SweepOutcome:
    """Compute every sample of ``spec`` missing from ``out`` on the cluster ``run``."""
    run = run or spec.run
    plan = Plan(spec)
    t0 = time.monotonic()
    with ResultFile(out, plan) as store, RunSignals() as sig:
        n_missing = plan.n_samples - store.n_done
        per_task = run.samples_per_task or auto_task_size(n_missing, run)
        progress = ProgressFile(out, {"spec_hash": plan.spec_hash(), "host": os.uname().nodename,
                                      "pid": os.getpid(), "cluster": run.cluster,
                                      "n_samples": plan.n_samples})
        mon = Monitor(n_missing, run.progress, progress, stored=store.n_done)
        state, error = "interrupted", None
        try:
            with mon:
                if run.cluster != "address":
                    check_limits(store, mon, n_missing, *workers_and_memory(run))
                tasks = plan.tasks(missing_indices(store.done_mask()), per_task)
                n_tasks = math.ceil(n_missing / per_task)
                if n_missing == 0:
                    _started(store, run, mon)
                elif run.cluster == "serial":
                    _run_serial(store, plan.task_json(), tasks, run, mon, sig, n_tasks)
                else:
                    _run_dask(store, plan.task_json(), tasks, run, mon, sig, n_tasks)
                state = "complete"
        except KeyboardInterrupt:
            raise KeyboardInterrupt(f"interrupted; {_kept(store)}: rerun the same command to "
                                    "resume") from None
        except RunStopped as exc:
            state, error = "terminated", f"stopped by {exc.name}"
            exc.message = f"stopped by {exc.name}; {_kept(store)}: rerun the same command to resume"
            raise
        except UserError as exc:
            state, error = "failed", str(exc)
            raise
        except Exception as exc:
            state, error = "failed", f"{type(exc).__name__}: {exc}"
            raise
        finally:
            store.finish(state, error)
            mon.finish(state, error)
            if store.f is None or store.remove_if_unused():
                progress.remove()
        e = store.run_entry
    return SweepOutcome(str(out), plan.n_samples, plan.n_samples - n_missing, e["computed"],
                        time.monotonic() - t0, e.get("startup_s", 0.0), e.get("compute_s", 0.0),
                        e["storage_s"], e["task_s"])
