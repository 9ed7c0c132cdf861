"""dask preload of the local cluster's workers (``distributed.worker.preload``), run when a
worker starts, also after the nanny restarts it.

The driver owns the terminal: a Ctrl-C there goes to the whole process group, workers
included, and each worker would print its own KeyboardInterrupt traceback.  Local workers
therefore ignore SIGINT (the driver closes them), and do not log a warning for each task the
driver cancels; the driver reports the stop itself, in one line.
"""

from __future__ import annotations

import contextlib
import logging
import signal


def dask_setup(worker) -> None:  # noqa: ARG001 - dask's preload entry point
    with contextlib.suppress(ValueError):  # only possible in the main thread
        signal.signal(signal.SIGINT, signal.SIG_IGN)
    logging.getLogger("distributed.worker.state_machine").setLevel(logging.ERROR)
