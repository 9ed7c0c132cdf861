"""dask preload of the local cluster's workers (``distributed.worker.preload``), run when a
worker starts, also after the nanny restarts it.

The driver owns the terminal: a Ctrl-C there goes to the whole process group, workers
included, and each worker would print its own KeyboardInterrupt traceback.  Local workers
therefore ignore SIGINT (the driver closes them), and do not log a warning for each task the
driver cancels, nor a traceback for a heartbeat that finds the scheduler already closed while
the driver shuts the cluster down; the driver reports the stop itself, in one line.
"""

from __future__ import annotations

import contextlib
import logging
import signal


def dask_setup(worker) -> None:  # noqa: ARG001 - dask's preload entry point
    with contextlib.suppress(ValueError):  # only possible in the main thread
        signal.signal(signal.SIGINT, signal.SIG_IGN)
    logging.getLogger("distributed.worker.state_machine").setLevel(logging.ERROR)
    logging.getLogger("distributed.worker").addFilter(_closed_scheduler_heartbeat)


def _closed_scheduler_heartbeat(record: logging.LogRecord) -> bool:
    """False (drop) for the error a worker logs when its heartbeat meets a closed scheduler."""
    return not record.getMessage().startswith("Failed to communicate with scheduler during "
                                              "heartbeat")
