"""Signals during a run: Ctrl-C, SIGTERM and SIGHUP become exceptions the run loop turns
into a recorded state and one line (:mod:`sweep.execution.execute`)."""

from __future__ import annotations

import contextlib
import signal
import threading
from typing import Iterator

from sweep.errors import RunStopped


class RunSignals:
    """Ctrl-C, SIGTERM and SIGHUP during a run (main thread only).

    They raise KeyboardInterrupt / :class:`RunStopped`, except inside :meth:`critical`
    (an HDF5 write), where they are held and raised right after it.  SIGHUP is left alone
    when it is ignored (``nohup``).
    """

    def __init__(self) -> None:
        self.active = threading.current_thread() is threading.main_thread()
        self.inside = False
        self.pending: BaseException | None = None
        self.old: dict[int, object] = {}

    def _raise(self, exc: BaseException) -> None:
        if self.inside:
            self.pending = self.pending or exc
        else:
            raise exc

    def _handler(self, signum: int, frame) -> None:
        if signum == signal.SIGINT:
            self._raise(KeyboardInterrupt())
        else:
            self._raise(RunStopped(signum, signal.Signals(signum).name))

    def __enter__(self) -> "RunSignals":
        if self.active:
            for sig in (signal.SIGINT, signal.SIGTERM, signal.SIGHUP):
                if signal.getsignal(sig) != signal.SIG_IGN:
                    self.old[sig] = signal.signal(sig, self._handler)
        return self

    def __exit__(self, *exc: object) -> None:
        for sig, handler in self.old.items():
            signal.signal(sig, handler)

    @contextlib.contextmanager
    def critical(self) -> Iterator[None]:
        self.inside = True
        try:
            yield
        finally:
            self.inside = False
        if self.pending is not None:
            exc, self.pending = self.pending, None
            raise exc

    @contextlib.contextmanager
    def children_ignore_ctrl_c(self, local: bool) -> Iterator[None]:
        """While local worker processes are spawned, SIGINT is ignored, so they inherit
        that and a Ctrl-C in the terminal reaches the driver only (a Ctrl-C in these few
        seconds is lost)."""
        if not (local and self.active and signal.SIGINT in self.old):
            yield
            return
        signal.signal(signal.SIGINT, signal.SIG_IGN)
        try:
            yield
        finally:
            signal.signal(signal.SIGINT, self._handler)
