"""A sweep inside one SLURM allocation (``run.cluster: allocation``).

Many sites forbid long processes on login nodes, so the whole sweep runs as one batch job:
``sbatch -n N --wrap "orderless run SPEC -o OUT.h5 --cluster allocation"``.  The driver (in
the batch step) hosts the scheduler and starts one job step of single-threaded workers, one
per allocated task, with ``srun``; the workers get the cluster settings and the TLS
credentials through their environment.  A cancelled job leaves a readable file: the same line
resubmitted computes only what is missing.
"""

from __future__ import annotations

import contextlib
import os
import shlex
import signal
import subprocess
import sys
import threading
from typing import Iterator

from sweep.errors import UserError
from .security import is_loopback
from sweep.spec.run import AllocationSpec, RunSpec


# The workers share the job's output with the driver: their routine INFO lines (start, plugin,
# close) would bury the summary, so only their warnings and errors are shown.
WORKER_LOGS = {"DASK_LOGGING__DISTRIBUTED": "warning"}
STEP_NAME = "orderless-workers"  # the name of the workers' job step (to signal it)


def allocated_tasks() -> int:
    """Tasks of the current SLURM allocation (``SLURM_NTASKS``); 1 when unknown."""
    for name in ("SLURM_NTASKS", "SLURM_NPROCS"):
        value = os.environ.get(name, "")
        if value.isdigit() and int(value) > 0:
            return int(value)
    return 1


def srun_command(address: str, n: int, spec: AllocationSpec) -> list[str]:
    """The srun line that starts ``n`` single-threaded workers of the scheduler ``address``,
    each named after its job and task and bound to its node's host name (or interface).

    The workers run without a nanny: SLURM, not a nanny, holds the step to its memory, and a
    signal to the step reaches the worker itself, which then closes gracefully (a nanny's
    worker process got the signal too and hung in its close).  A worker that dies is not
    restarted; dask hands its tasks to the others."""
    worker = [sys.executable, "-m", "distributed.cli.dask_worker", address, "--nthreads", "1",
              "--no-nanny", "--no-dashboard", "--death-timeout", "60"]
    worker += ["--interface", spec.interface] if spec.interface else []
    where = "" if spec.interface else \
        ' --host "$(hostname)" --dashboard-address "$(hostname):0"'
    line = (f'exec {shlex.join(worker)}{where} '
            '--name "slurm-$SLURM_JOB_ID.$SLURM_PROCID"')
    return ["srun", f"--ntasks={n}", "--cpus-per-task=1", "--kill-on-bad-exit=0",
            f"--job-name={STEP_NAME}",
            *spec.srun_args, "sh", "-c", line]


def _interrupt(signum, frame):  # noqa: ARG001 - signal handler signature
    raise KeyboardInterrupt


@contextlib.contextmanager
def allocation_cluster(run: RunSpec, security=None, worker_env=None) -> Iterator:
    """A scheduler in this process and ``srun`` workers, one per task of the allocation.

    SIGTERM (``scancel``, the walltime) is turned into KeyboardInterrupt while it runs, so the
    sweep closes its file as interrupted.
    """
    from distributed import LocalCluster

    from .cluster_options import ONE_THREAD, StartWatch, bind_host, http_options
    if not os.environ.get("SLURM_JOB_ID"):
        raise UserError("run.cluster='allocation' runs inside a SLURM allocation (sbatch or "
                        "salloc): SLURM_JOB_ID is not set")
    spec = run.allocation or AllocationSpec()
    host = bind_host(spec.scheduler_host, spec.interface, "run.allocation")
    nodes = os.environ.get("SLURM_JOB_NUM_NODES", "1")
    if nodes.isdigit() and int(nodes) > 1 and is_loopback(host):
        raise UserError(f"run.cluster='allocation': the scheduler host {host!r} is loopback "
                        f"but the allocation spans {nodes} nodes; set run.allocation.interface "
                        "or scheduler_host")
    n = run.workers or allocated_tasks()
    cluster = LocalCluster(n_workers=0, host=host, scheduler_port=0, security=security,
                           protocol="tls://" if security else "tcp://",
                           scheduler_kwargs=http_options(run, host), dashboard_address=None)
    env = {**os.environ, **ONE_THREAD, **(worker_env or {}), **WORKER_LOGS}
    # SIGTERM (scancel, the walltime) ends the run as interrupted, unless the run loop has its
    # own handler in place (sweep.execution.signals, which records "terminated")
    main = threading.current_thread() is threading.main_thread() and \
        signal.getsignal(signal.SIGTERM) in (signal.SIG_DFL, None)
    previous = signal.signal(signal.SIGTERM, _interrupt) if main else None
    srun = None
    try:
        srun = subprocess.Popen(srun_command(cluster.scheduler_address, n, spec), env=env,
                                stdin=subprocess.DEVNULL)
        cluster.watch = StartWatch()
        cluster.watch.probes.append(lambda: _ended(srun))
        yield cluster
    finally:
        if main:
            signal.signal(signal.SIGTERM, previous)
        if srun is not None:
            _stop(srun)
        cluster.close()


def _ended(srun: subprocess.Popen) -> str | None:
    if srun.poll() is None:
        return None
    return (f"run.cluster='allocation': the workers' srun ended (exit code {srun.returncode}) "
            "before a worker joined; its message is above")


def _stop(srun: subprocess.Popen) -> None:
    """End the worker step while the scheduler is still up: SIGINT to its tasks through
    ``scancel --signal`` (each ``dask worker`` then closes gracefully) and up to 15 s for srun
    to end; then srun itself is stopped by its PID (SIGTERM: srun cancels the step; SIGKILL
    5 s later)."""
    job = os.environ.get("SLURM_JOB_ID", "")
    steps = subprocess.run(["squeue", "--steps", "--jobs", job, "--noheader", "--format",
                            "%i %j"], capture_output=True, text=True, check=False).stdout
    for line in steps.splitlines():
        step, _, name = line.partition(" ")
        if name.strip() == STEP_NAME:
            subprocess.run(["scancel", "--signal=INT", step], capture_output=True,
                           check=False)
    with contextlib.suppress(subprocess.TimeoutExpired):
        srun.wait(timeout=15)
    for sig in (signal.SIGTERM, signal.SIGKILL):
        if srun.poll() is not None:
            return
        srun.send_signal(sig)
        with contextlib.suppress(subprocess.TimeoutExpired):
            srun.wait(timeout=5)
