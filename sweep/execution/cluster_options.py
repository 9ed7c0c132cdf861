"""What every kind of cluster the tool starts shares: the one-thread environment of its workers,
the host its scheduler binds, the scheduler's HTTP options, and the watch that ends a start
early (used by :mod:`sweep.execution.clusters` and the jobqueue and allocation clusters).
"""

from __future__ import annotations

import socket

from sweep.errors import UserError
from sweep.spec.run import RunSpec
from .security import notice

ONE_THREAD = {"OMP_NUM_THREADS": "1", "MKL_NUM_THREADS": "1", "OPENBLAS_NUM_THREADS": "1"}


def bind_host(scheduler_host: str | None, interface: str | None, section: str) -> str:
    """The host a scheduler the tool starts binds: ``scheduler_host``, else the address of
    ``interface``, else this machine's host name (``section`` names the spec section)."""
    if scheduler_host:
        return scheduler_host
    if interface:
        from distributed.utils import get_ip_interface
        try:
            return get_ip_interface(interface)
        except ValueError as exc:
            raise UserError(f"{section}.interface={interface!r}: {exc}") from None
    return socket.gethostname()


def _port_free(host: str, port: int) -> bool:
    with socket.socket() as s:
        try:
            s.bind((host, port))
        except OSError:
            return False
    return True


def http_options(run: RunSpec, host: str) -> dict:
    """The scheduler's HTTP server: dask always starts one (health, metrics); without
    ``run.dashboard`` it has no dashboard and a free port on ``host`` (no warning about a
    port 8787 in use); with it, the dashboard on 8787 when free, else on a free port."""
    try:
        bind = socket.gethostbyname(host)
    except OSError:  # not resolvable here: let dask bind the name (and report the error)
        bind = host
    port = 8787 if run.dashboard and _port_free(bind, 8787) else 0
    return {"dashboard": run.dashboard, "dashboard_address": f"{bind}:{port}"}


class StartWatch:
    """What ends a cluster's start early: problems reported (a job the batch system refused)
    or found by a probe (the workers' srun ended).  After the start, a report is a warning."""

    def __init__(self) -> None:
        self.problems: list[str] = []
        self.probes: list = []
        self.started = False

    def report(self, message: str) -> None:
        self.problems.append(message)
        if self.started:
            notice(message)

    def problem(self) -> str | None:
        for probe in self.probes:
            found = probe()
            if found:
                return found
        return self.problems[0] if self.problems else None
