"""The dask clusters a sweep runs on: local, an existing scheduler, a batch queue, an allocation.

:func:`open_client` hands out a client whose cluster has at least one worker (waiting at most
``run.start_timeout`` seconds for it), with every worker warmed up for the spec when it joins
(:class:`sweep.execution.worker_plugin.WarmUp`: workers that join later, replacements included, get
it too).  Every cluster this module starts gets :data:`CLUSTER_CONFIG`, in the driver and, through
their environment (:func:`config_environ`), on workers started as batch jobs or job steps.
No dashboard unless ``run.dashboard``; then its link is printed.
"""

from __future__ import annotations

import contextlib
import os
import socket
import sys
import time
from typing import Iterator

from sweep.errors import UserError
from sweep.spec.run import RunSpec
from .cluster_options import ONE_THREAD, StartWatch, http_options
from .security import notice, security_for, warn_if_plain, worker_environ

# dask settings for the clusters this module starts.  One task per worker thread at a time:
# with every task assigned up front, one worker was left with the cheap tasks and idled
# ~0.5 s of a 3.4 s two-worker sweep while work stealing did not move the rest (handing out
# one at a time costs ~5 ms between tasks).  The sampling profiler cost the workers
# ~8% of their time.  dask's housekeeping (20 ms event-loop ticks, 0.5 s system monitor with
# GIL sampling, 0.1 s memory polls) took ~0.29 CPU-s per 3.4 s of an idle two-worker local
# cluster, 4% of a 2-core machine; at the intervals below it takes 0.04 CPU-s.  The nannies
# still enforce memory limits, polling every second.
CLUSTER_CONFIG = {
    "distributed.nanny.pre-spawn-environ": ONE_THREAD,
    "distributed.scheduler.worker-saturation": 1.0,
    "distributed.worker.profile.enabled": False,
    "distributed.admin.tick.interval": "1s",
    "distributed.admin.system-monitor.interval": "5s",
    "distributed.admin.system-monitor.gil.enabled": False,
    "distributed.worker.memory.monitor-interval": "1s",
}


def config_environ(config: dict) -> dict[str, str]:
    """``DASK_...`` environment variables that set ``config`` in a new dask process (dask's
    documented mechanism: ``__`` nests, values are read with ``ast.literal_eval``)."""
    env = {}
    for key, value in config.items():
        name = "DASK_" + "__".join(part.upper().replace("-", "_") for part in key.split("."))
        env[name] = value if isinstance(value, str) else repr(value)
    return env


def expected_workers(run: RunSpec) -> int:
    """How many workers ``run`` will have (for the automatic task size)."""
    if run.cluster == "jobqueue" and run.jobqueue is not None:
        return run.jobqueue.jobs * run.jobqueue.processes
    if run.cluster == "allocation":
        from .cluster_allocation import allocated_tasks
        return run.workers or allocated_tasks()
    return run.workers or os.cpu_count() or 1


def _check_dashboard(run: RunSpec) -> None:
    if run.dashboard:
        try:
            import bokeh  # noqa: F401 - dask's dashboard is drawn with bokeh
        except ImportError:
            raise UserError('run.dashboard needs bokeh: pip install "orderless[dashboard]"'
                            ) from None


def wait_for_first_worker(client, run: RunSpec, watch: StartWatch | None = None) -> None:
    """Block until the cluster has a worker; a problem of ``watch`` or ``run.start_timeout``
    seconds without a worker raise a one-line UserError.  With ``run.progress``, a wait of
    more than 5 s is announced on stderr (a batch queue may hold the jobs for a while)."""
    watch = watch or StartWatch()
    t0 = time.monotonic()
    deadline, told = t0 + run.start_timeout, not run.progress
    while True:
        if not told and time.monotonic() - t0 > 5:
            print(f"orderless: waiting for the first worker (at most run.start_timeout="
                  f"{run.start_timeout:g} s)", file=sys.stderr, flush=True)
            told = True
        problem = watch.problem()
        if problem:
            raise UserError(problem)
        left = deadline - time.monotonic()
        if left <= 0:
            where = f"the scheduler {run.address}" if run.cluster == "address" else \
                f"the {run.cluster} cluster"
            raise UserError(f"no worker joined {where} within run.start_timeout="
                            f"{run.start_timeout:g} s (a busy queue needs a longer timeout; "
                            "or the workers cannot reach the scheduler: see interface)")
        try:
            client.wait_for_workers(1, timeout=min(1.0, left))
            watch.started = True
            return
        except TimeoutError:
            continue


def _worker_threads() -> dict:
    """On a worker: its host, cores and BLAS threads (from the variables BLAS libraries read;
    unset means one per core)."""
    cores = len(os.sched_getaffinity(0)) if hasattr(os, "sched_getaffinity") else \
        os.cpu_count() or 1
    env = os.environ
    blas = max(int(env.get(v) or env.get("OMP_NUM_THREADS") or cores)
               for v in ("MKL_NUM_THREADS", "OPENBLAS_NUM_THREADS"))
    return {"host": socket.gethostname(), "cores": cores, "blas": blas}


def check_threads(client) -> None:
    """Warn when the workers on a host would run more threads than it has cores (dask
    threads times BLAS threads): external workers are not pinned by this tool."""
    info = client.scheduler_info(n_workers=-1)["workers"]
    load: dict[str, list] = {}
    for addr, w in client.run(_worker_threads).items():
        entry = load.setdefault(w["host"], [0, w["cores"]])
        entry[0] += info.get(addr, {}).get("nthreads", 1) * w["blas"]
    for host, (threads, cores) in sorted(load.items()):
        if threads > cores:
            notice(f"workers on {host} run {threads} threads (dask threads x BLAS threads) on "
                   f"{cores} cores; start them with --nthreads 1 and OMP_NUM_THREADS=1 "
                   "MKL_NUM_THREADS=1 OPENBLAS_NUM_THREADS=1")


def _connect(run: RunSpec, security):
    from distributed import Client
    warn_if_plain(run.address)
    try:
        return Client(run.address, timeout=f"{min(run.start_timeout, 30.0):g}s",
                      security=security)
    except (OSError, TimeoutError, ValueError, TypeError) as exc:
        reason = str(exc).splitlines()[0] if str(exc) else type(exc).__name__
        raise UserError(f"run.address={run.address!r}: cannot reach the scheduler "
                        f"({reason}); expected a running dask scheduler") from None


def _start_cluster(run: RunSpec, security, stack: contextlib.ExitStack):
    from distributed import LocalCluster
    env = config_environ(CLUSTER_CONFIG)
    if run.cluster == "jobqueue":  # TLS: dask-jobqueue hands the workers files of mode 0600
        import dask
        from .cluster_jobqueue import JOBQUEUE_CONFIG, jobqueue_cluster
        stack.enter_context(dask.config.set(JOBQUEUE_CONFIG))
        return stack.enter_context(jobqueue_cluster(run, security, worker_env=env))
    if run.cluster == "allocation":  # TLS through the job step's environment
        from .cluster_allocation import allocation_cluster
        return stack.enter_context(allocation_cluster(
            run, security, worker_env={**env, **worker_environ(security)}))
    return stack.enter_context(LocalCluster(
        n_workers=run.workers or os.cpu_count() or 1, threads_per_worker=1, processes=True,
        host="127.0.0.1", security=security, protocol="tls://" if security else "tcp://",
        dashboard_address=None, scheduler_kwargs=http_options(run, "127.0.0.1")))


@contextlib.contextmanager
def open_client(run: RunSpec, spec_json: str | None = None) -> Iterator:
    """A dask Client for ``run`` (local, address, jobqueue or allocation) with at least one
    worker; with ``spec_json`` every worker is warmed up for it when it joins.  The cluster
    (if this call started it) and the client are closed on exit."""
    import dask
    from distributed import Client
    _check_dashboard(run)
    security = security_for(run)
    with contextlib.ExitStack() as stack:
        if run.cluster == "address":
            client = stack.enter_context(_connect(run, security))
            watch = None
        else:
            stack.enter_context(dask.config.set(CLUSTER_CONFIG))
            cluster = _start_cluster(run, security, stack)
            client = stack.enter_context(Client(cluster, security=security))
            watch = getattr(cluster, "watch", None)
        if run.dashboard:
            print(f"dashboard: {client.dashboard_link}", file=sys.stderr, flush=True)
        wait_for_first_worker(client, run, watch)
        if run.cluster == "address":
            with contextlib.suppress(Exception):  # a check: it never stops a run
                check_threads(client)
        if spec_json is not None:
            warm_up_workers(client, spec_json)
        yield client


def warm_up_workers(client, task_json: str) -> None:
    """Every worker compiles the problems of ``task_json`` now, and every worker that joins
    later when it joins (:class:`sweep.execution.worker_plugin.WarmUp`)."""
    from .worker_plugin import WarmUp
    client.register_plugin(WarmUp(task_json))
