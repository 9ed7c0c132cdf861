"""The progress file: a small JSON beside the results, ``OUT.h5.progress.json``.

The driver replaces it atomically (write to a temporary name, ``os.replace``) at every phase
change, after every task and at least every :data:`HEARTBEAT` seconds, so a reader (``orderless
status``, a script, a copy fetched from a cluster) always gets one complete object.  It stays
after the run with the final state.  Fields (format version 1):

========================  ===========================================================
``format``, ``version``   ``"orderless-progress"``, 1
``results``               file name of the results file (same folder)
``spec_hash``             the results file's ``spec_hash``
``run_id``, ``host``,     the run (same id as in the results file's ``runs``), the driver's
``pid``, ``cluster``      host and process id, the cluster kind
``state``                 ``running`` while the driver lives, then ``complete``,
                          ``interrupted`` (Ctrl-C), ``terminated`` (SIGTERM/SIGHUP) or
                          ``failed`` (see ``error``); readers report a ``running`` file whose
                          driver is gone as ``dead`` (:func:`sweep.storage.status.run_status`)
``phase``                 ``starting cluster``, ``compiling``, ``solving``, ``finished``
``phase_detail``          e.g. the cluster's workers, or the estimate per sample
``started``, ``updated``  ISO times; ``updated_unix``: seconds since the epoch
``n_samples``             samples in the spec
``stored``                rows in the results file now
``to_compute``            samples this run set out to compute
``computed``              of those, stored so far
``statuses``              this run's rows by status: ``ok``, ``invalid``, ``failed``, ``error``
``verdicts``              this run's rows by verdict: ``separable``, ``nonseparable``,
                          ``undecided``
``rate``                  samples per second since the first task was submitted (null before
                          the first result)
``eta_s``                 seconds left at that rate (null if unknown)
``elapsed_s``             seconds since the run started
``last_error``            the latest row with status ``error`` or ``failed``: ``index``,
                          ``status``, ``message`` (null if none)
``error``                 the one-line message that ended the run (null otherwise)
========================  ===========================================================
"""

from __future__ import annotations

import contextlib
import json
import os
import time
from pathlib import Path
from typing import Any

PROGRESS_FORMAT = "orderless-progress"
PROGRESS_VERSION = 1
SUFFIX = ".progress.json"
HEARTBEAT = 10.0


def progress_path(results: str | Path) -> Path:
    """The progress file of a results file."""
    p = Path(results)
    return p.with_name(p.name + SUFFIX)


def read_progress(results: str | Path) -> dict[str, Any] | None:
    """The progress file of ``results`` as a dict, or None if there is none (or it is not a
    progress file)."""
    try:
        data = json.loads(progress_path(results).read_text())
    except (OSError, ValueError):
        return None
    return data if isinstance(data, dict) and data.get("format") == PROGRESS_FORMAT else None


def iso(t: float | None = None) -> str:
    return time.strftime("%Y-%m-%dT%H:%M:%S%z", time.localtime(t))


class ProgressFile:
    """Writes the progress file; a failed write (disk full) is skipped, never raised."""

    def __init__(self, results: str | Path, fields: dict[str, Any]) -> None:
        self.path = progress_path(results)
        self.data: dict[str, Any] = {"format": PROGRESS_FORMAT, "version": PROGRESS_VERSION,
                                     "results": Path(results).name, **fields}
        self.written = False
        self.failed_writes = 0

    def write(self, **fields: Any) -> None:
        self.data.update(fields)
        now = time.time()
        self.data.update(updated=iso(now), updated_unix=round(now, 3))
        tmp = self.path.with_name(self.path.name + f".{os.getpid()}.tmp")
        try:
            tmp.write_text(json.dumps(self.data, indent=1, default=_plain))
            os.replace(tmp, self.path)
            self.written = True
        except OSError:
            self.failed_writes += 1
            with contextlib.suppress(OSError):
                tmp.unlink()

    def remove(self) -> None:
        with contextlib.suppress(OSError):
            self.path.unlink()


def _plain(value: Any) -> Any:
    """JSON fallback for numpy scalars."""
    return value.item() if hasattr(value, "item") else str(value)
