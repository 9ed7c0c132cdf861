"""The state of a sweep from its files, for ``orderless status`` and for scripts.

:func:`run_status` combines the progress file (:mod:`sweep.storage.progress`), the liveness lock
(:func:`sweep.storage.live.writer_alive`) and the results file's own record (read consistently
with :func:`sweep.storage.live.reading`); it needs no dask and works while the sweep runs.
"""

from __future__ import annotations

import json
import time
from pathlib import Path
from typing import Any

from .live import reading, writer_alive
from .progress import read_progress
from .results import check_format, mark_dead


def run_status(results: str | Path) -> dict[str, Any]:
    """The sweep's state: ``state`` (``running``, ``complete``, ``interrupted``,
    ``terminated``, ``failed``, ``dead``, or ``none`` when neither file exists), ``alive``,
    ``stored`` and ``n_samples`` (from the results file when it exists), ``last_run`` (its
    entry in ``runs``), ``progress`` (the progress file, or None) and ``updated_ago_s``."""
    path = Path(results)
    alive = writer_alive(path)
    progress = read_progress(path)
    out: dict[str, Any] = {"results": str(path), "alive": alive, "progress": progress,
                           "stored": None, "n_samples": None, "last_run": None}
    if path.is_file():
        with reading(path) as f:
            check_format(f, path)
            out["stored"] = int(f.attrs["committed"])
            out["n_samples"] = int(f.attrs["n_samples"])
            runs = json.loads(f.attrs["runs"])
        runs = mark_dead(runs, alive)
        out["last_run"] = runs[-1] if runs else None
    state = (out["last_run"] or {}).get("state")
    if progress is not None and (state is None or progress.get("run_id") in (
            None, (out["last_run"] or {}).get("id"))):
        state = progress.get("state", state)
        if state == "running" and not alive:
            state = "dead"
        if out["n_samples"] is None:
            out["n_samples"], out["stored"] = progress.get("n_samples"), progress.get("stored")
    out["state"] = state or "none"
    if progress and progress.get("updated_unix"):
        out["updated_ago_s"] = round(time.time() - float(progress["updated_unix"]), 1)
    return out
