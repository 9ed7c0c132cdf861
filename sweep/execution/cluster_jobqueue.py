"""Batch-queue clusters through dask-jobqueue (``run.cluster: jobqueue``).

Each job runs ``dask worker`` with one BLAS thread, the settings of
:data:`sweep.execution.clusters.CLUSTER_CONFIG` (exported in the job script: ``dask.config.set`` in
the driver does not reach a batch job) and a lifetime shorter than the walltime, staggered so that
the workers do not all leave at once.  The cluster is adaptive with a fixed size, so a job that
ends (lifetime, ``scancel``, a lost node) is replaced by a new one.  A job the batch system
refuses is recorded with its message, so the driver can stop at once with it.
"""

from __future__ import annotations

import logging
import os
import shlex

from sweep.errors import UserError
from sweep.spec.run import RunSpec, walltime_seconds

CLASSES = {"slurm": "SLURMCluster", "pbs": "PBSCluster", "sge": "SGECluster",
           "lsf": "LSFCluster"}
# dask settings of the driver for batch-queue clusters: a worker that is gone is forgotten
# after 5 s (dask's default 15 s is meant for a nanny that restarts it; a batch job that ended
# does not come back), so that its replacement is submitted 5 s after it left.
JOBQUEUE_CONFIG = {"distributed.deploy.lost-worker-timeout": "5s"}


def worker_lifetime(walltime: str) -> tuple[float, float]:
    """Worker lifetime and stagger (seconds) for a job of ``walltime``: each worker leaves
    between ``margin`` and ``margin / 2`` before the walltime, ``margin = min(5 min, walltime
    / 4)``, time enough to hand its work back before the batch system kills the job."""
    total = walltime_seconds(walltime)
    margin = min(300.0, total / 4)
    return total - 0.75 * margin, margin / 4


def _refusal(exc: BaseException) -> str:
    """The batch system's own message from dask-jobqueue's submission error."""
    text = str(exc)
    err = text.split("stderr:", 1)[1] if "stderr:" in text else text
    lines = [line.strip() for line in err.splitlines() if line.strip()]
    return "; ".join(lines) or type(exc).__name__


class JobRefused(RuntimeError):
    """The batch system refused a job; its message is reported to the cluster's ``watch``."""


class _DropRefusals(logging.Filter):
    """The traceback dask logs for a refused job: reported instead as one line."""

    def filter(self, record: logging.LogRecord) -> bool:
        return not (record.exc_info and isinstance(record.exc_info[1], JobRefused))


DROP_REFUSALS = _DropRefusals()


def _recording_job(base: type, watch) -> type:
    """``base`` (a dask-jobqueue Job class) that reports why a submission failed."""
    from distributed.core import Status

    class Recorded(base):
        async def start(self):
            try:
                await super().start()
            except Exception as exc:  # the submission command failed: keep its message
                message = _refusal(exc)
                watch.report(f"run.jobqueue: the batch system refused the job: {message}")
                self.status = Status.failed
                raise JobRefused(message) from None

    Recorded.__name__ = Recorded.__qualname__ = base.__name__
    return Recorded


def _exports(environ: dict[str, str]) -> list[str]:
    return [f"export {k}={shlex.quote(v)}" for k, v in environ.items()]


def jobqueue_cluster(run: RunSpec, security=None, start: bool = True, worker_env=None):
    """The dask-jobqueue cluster of ``run.jobqueue``; with ``start`` it keeps ``jobs`` jobs.

    ``worker_env`` is exported in the job script before the worker starts.  The cluster's
    ``watch`` (:class:`sweep.execution.cluster_options.StartWatch`) gets the batch system's message
    for each job it refused.
    """
    try:
        import dask
        import dask_jobqueue
    except ImportError:
        raise UserError("run.cluster='jobqueue' needs dask-jobqueue: pip install "
                        '"orderless[jobqueue]"') from None
    from .cluster_options import ONE_THREAD, StartWatch, bind_host, http_options
    jq = run.jobqueue
    cls = getattr(dask_jobqueue, CLASSES[jq.system])
    watch = StartWatch()
    interface = jq.interface or dask.config.get(f"jobqueue.{cls.job_cls.config_name}"
                                                ".interface", None)
    lifetime, stagger = worker_lifetime(jq.walltime)
    worker_args = ["--lifetime", f"{lifetime:g}s", "--lifetime-stagger", f"{stagger:g}s",
                   "--no-dashboard"]
    host = bind_host(jq.scheduler_host, interface, "run.jobqueue")
    scheduler_options = {"host": host, **http_options(run, host)}
    if not interface:  # each worker (and its HTTP server) binds its node's host name only
        worker_args += ["--host", "$(hostname)", "--dashboard-address", "$(hostname):0"]
    cluster = cls(
        cores=jq.cores, processes=jq.processes, memory=jq.memory, walltime=jq.walltime,
        queue=jq.queue, account=jq.account, job_extra_directives=list(jq.extra_directives),
        job_script_prologue=[*_exports({**ONE_THREAD, **(worker_env or {})}), *jq.prologue],
        worker_extra_args=worker_args, job_cls=_recording_job(cls.job_cls, watch),
        interface=interface, scheduler_options=scheduler_options, security=security,
        shared_temp_directory=jq.shared_directory or os.getcwd())
    cluster.watch = watch
    logging.getLogger("tornado.application").addFilter(DROP_REFUSALS)
    if start:
        cluster.adapt(minimum_jobs=jq.jobs, maximum_jobs=jq.jobs)
    return cluster
