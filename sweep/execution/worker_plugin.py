"""The worker plugin of a sweep: every worker is warmed up for the spec when it joins.

Registered by :func:`sweep.execution.clusters.open_client`.  dask hands a registered worker plugin
to every worker present and to every worker that joins later (a restarted, replaced or late
batch-queue worker), so none of them pays for the imports and compiled problems in its first
task, and the cluster's start-up is not counted in the compute phase.
"""

from __future__ import annotations

import asyncio
import contextlib

from distributed.diagnostics.plugin import WorkerPlugin


def _warm_up(spec_json: str) -> None:
    from sweep.planning.task import warm_up  # the numerical core: imported here, off the event loop
    with contextlib.suppress(Exception):  # a failure is left to the tasks, per sample
        warm_up(spec_json)


class WarmUp(WorkerPlugin):
    """Import the numerical core, build the plan and compile its problems on the worker, in
    its task thread: its event loop stays free, and no task starts before the warm-up ends."""

    name = "orderless-warm-up"

    def __init__(self, spec_json: str) -> None:
        self.spec_json = spec_json

    async def setup(self, worker) -> None:
        loop = asyncio.get_running_loop()
        await loop.run_in_executor(worker.executors["default"], _warm_up, self.spec_json)
