"""The dask clusters a sweep runs on: local, an existing scheduler, a batch queue.

:func:`open_client` hands out a client for a :class:`sweep.spec_run.RunSpec`; every cluster
this module starts gets :data:`CLUSTER_CONFIG`.
"""

from __future__ import annotations

import contextlib
import os
from typing import Iterator

from .errors import UserError
from .spec_run import RunSpec

ONE_THREAD = {"OMP_NUM_THREADS": "1", "MKL_NUM_THREADS": "1", "OPENBLAS_NUM_THREADS": "1"}
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


def jobqueue_cluster(run: RunSpec, start: bool = True):
    """The dask-jobqueue cluster of ``run.jobqueue`` (jobs submitted only if ``start``)."""
    try:
        import dask_jobqueue
    except ImportError:
        raise UserError("run.cluster='jobqueue' needs dask-jobqueue: pip install "
                        "'orderless[jobqueue]'") from None
    jq = run.jobqueue
    cls = {"slurm": "SLURMCluster", "pbs": "PBSCluster", "sge": "SGECluster",
           "lsf": "LSFCluster"}[jq.system]
    cluster = getattr(dask_jobqueue, cls)(
        cores=jq.cores, processes=jq.processes, memory=jq.memory, walltime=jq.walltime,
        queue=jq.queue, account=jq.account, job_extra_directives=list(jq.extra_directives),
        job_script_prologue=[*(f"export {k}={v}" for k, v in ONE_THREAD.items()),
                             *jq.prologue])
    if start:
        cluster.scale(jobs=jq.jobs)
    return cluster


@contextlib.contextmanager
def open_client(run: RunSpec) -> Iterator:
    """A dask Client for ``run`` (local, address or jobqueue); closed on exit."""
    import dask
    from distributed import Client, LocalCluster
    if run.cluster == "address":
        try:
            client = Client(run.address, timeout="10s")
        except (OSError, TimeoutError) as exc:
            raise UserError(f"run.address={run.address!r}: cannot reach the scheduler "
                            f"({exc}); expected a running dask scheduler") from None
        with client:
            yield client
        return
    with dask.config.set(CLUSTER_CONFIG):
        if run.cluster == "jobqueue":
            cluster = jobqueue_cluster(run)
        else:
            n = run.workers or os.cpu_count() or 1
            cluster = LocalCluster(n_workers=n, threads_per_worker=1, processes=True,
                                   dashboard_address=None)
        with cluster, Client(cluster) as client:
            yield client
