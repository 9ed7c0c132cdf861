"""Signs of life of a running sweep: phases and progress on stderr, and the progress file.

Phases (starting the cluster, compiling, solving) are printed the moment they begin.  On a
terminal the progress line is redrawn in place once a second (the elapsed time moves even
while the first, long task runs); when stderr is not a terminal (a log file, a batch job)
a plain line is printed every :attr:`Monitor.interval` seconds instead.  The rate and the ETA
count from the first task submitted, so the cluster's start-up is not in them.  Every
change also goes to the progress file (:mod:`sweep.storage.progress`), and a background thread
rewrites it at least every :data:`sweep.storage.progress.HEARTBEAT` seconds.
"""

from __future__ import annotations

import sys
import threading
import time
from collections import Counter
from typing import Any, TextIO

from sweep.units import human_seconds
from sweep.storage.progress import HEARTBEAT, ProgressFile, iso

WIDTH = 30


class Monitor:
    """Progress of one run (use as a context manager: it runs the ticking thread)."""

    def __init__(self, to_compute: int, enabled: bool, progress: ProgressFile | None = None,
                 stream: TextIO | None = None, interval: float = 30.0, stored: int = 0) -> None:
        self.total, self.enabled, self.file = to_compute, enabled, progress
        self.stream = stream or sys.stderr
        self.tty = bool(getattr(self.stream, "isatty", lambda: False)())
        self.interval, self.stored = interval, stored
        self.done = 0
        self.t_start = time.monotonic()
        self.t_compute: float | None = None
        self.t_end: float | None = None  # when the last sample arrived (the rate stops there)
        self.last_line = self.last_beat = 0.0
        self._width = 0
        self.statuses: Counter = Counter()
        self.verdicts: Counter = Counter()
        self.last_error: dict[str, Any] | None = None
        self.phase_name = ""
        self._drawn = False
        self._lock = threading.Lock()
        self._stop = threading.Event()
        self._thread: threading.Thread | None = None

    # --- what the run loop reports ------------------------------------------------------
    def phase(self, name: str, detail: str = "") -> None:
        """A new phase: printed at once, recorded in the progress file."""
        with self._lock:
            self.phase_name = name
            self._say(f"{name}{': ' + detail if detail else ''}")
            self._write(phase=name, phase_detail=detail)

    def note(self, text: str) -> None:
        """A warning: printed even without progress display."""
        with self._lock:
            self._clear()
            self.stream.write(f"orderless: warning: {text}\n")
            self.stream.flush()

    def solving(self, n_tasks: int) -> None:
        self.t_compute = self.last_line = time.monotonic()
        self.phase("solving", f"{self.total} samples in {n_tasks} task{'s' * (n_tasks != 1)}")
        self.tick()

    def add(self, rows: list[dict[str, Any]], new: int) -> None:
        """Rows that came back from a task, ``new`` of them stored."""
        with self._lock:
            self.done += new
            self.stored += new
            if self.done >= self.total:
                self.t_end = time.monotonic()
            for r in rows:
                self.statuses[str(r.get("status", ""))] += 1
                self.verdicts[str(r.get("verdict", ""))] += 1
                if r.get("status") in ("error", "failed"):
                    self.last_error = {"index": int(r["index"]), "status": r["status"],
                                       "message": str(r.get("message", ""))[:300]}
            self._write()
        self.tick(force=self.done >= self.total)

    def tick(self, force: bool = False) -> None:
        """Redraw (terminal) or print a plain line (every ``interval``); heartbeat."""
        with self._lock:
            t = time.monotonic()
            if t - self.last_beat >= HEARTBEAT:
                self._write()
            if not self.enabled or self.t_compute is None or (self.t_end and not force):
                return
            if self.tty:
                line = self._line()
                self.stream.write("\r" + line.ljust(self._width))
                self._width = len(line)
                self._drawn = True
                self.stream.flush()
            elif force or t - self.last_line >= self.interval:
                self.last_line = t
                self._say(self._line())

    def finish(self, state: str, error: str | None = None) -> None:
        with self._lock:
            self._clear()
            self._write(state=state, phase="finished", phase_detail=state, error=error)

    # --- helpers ------------------------------------------------------------------------
    def rate(self) -> float | None:
        if self.t_compute is None or self.done == 0:
            return None
        return self.done / max((self.t_end or time.monotonic()) - self.t_compute, 1e-9)

    def _line(self) -> str:
        rate = self.rate()
        elapsed = time.monotonic() - (self.t_compute or self.t_start)
        head = f"{self.done}/{self.total} samples"
        if self.tty:
            fill = int(WIDTH * self.done / max(self.total, 1))
            head = f"[{'#' * fill}{'.' * (WIDTH - fill)}] {head}"
        if rate is None:
            return f"{head}, first results pending ({human_seconds(elapsed)} so far)"
        eta = (self.total - self.done) / rate
        return f"{head}  {rate:.3g} samples/s  ETA {human_seconds(eta)}"

    def _say(self, text: str) -> None:
        if not self.enabled:
            return
        self._clear()
        self.stream.write(f"orderless: {text}\n")
        self.stream.flush()

    def _clear(self) -> None:
        if self._drawn:
            self.stream.write("\n")
            self._drawn = False
            self._width = 0

    def _write(self, **fields: Any) -> None:
        if self.file is None:
            return
        self.last_beat = time.monotonic()
        rate = self.rate()
        left = None if not rate else round((self.total - self.done) / rate, 1)
        self.file.write(**fields, stored=self.stored, to_compute=self.total, computed=self.done,
                        statuses=dict(self.statuses), verdicts=dict(self.verdicts),
                        rate=None if rate is None else round(rate, 4), eta_s=left,
                        elapsed_s=round(time.monotonic() - self.t_start, 1),
                        last_error=self.last_error)

    # --- the ticking thread -------------------------------------------------------------
    def __enter__(self) -> "Monitor":
        if self.file is not None:
            self.file.write(state="running", started=iso())
        self._thread = threading.Thread(target=self._run, name="orderless-monitor",
                                        daemon=True)
        self._thread.start()
        return self

    def _run(self) -> None:
        while not self._stop.wait(1.0):
            try:
                self.tick()
            except (OSError, ValueError):  # a closed stderr must not kill the run
                return

    def __exit__(self, *exc: object) -> None:
        self._stop.set()
        if self._thread is not None:
            self._thread.join(timeout=5)
        with self._lock:
            self._clear()
