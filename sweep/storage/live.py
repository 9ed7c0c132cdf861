"""Reading a results file while a sweep is writing it: the lock protocol, liveness, snapshots.

HDF5 refuses a second opener of a file that a process holds open for writing, and a reader
that bypasses that lock could see a write half done.  So the driver (the only writer) keeps a
small lock file beside the results, ``OUT.h5.lock``, for as long as it has the file open, and
uses record locks on two of its bytes (Linux open-file-description locks, which also work
between a reader and a writer in one process; classic POSIX locks elsewhere):

* byte 1, **alive**: held exclusively by the writer from opening to closing the file.  A
  process that can take it (shared, without waiting) knows no writer is running, whatever
  the lock file or the run entries say (a driver killed with SIGKILL leaves the file behind
  but no lock).
* byte 0, **consistent**: the writer holds it exclusively while it changes the file, and
  every change ends with a flush; readers hold it shared while they read.  So a reader sees
  the file exactly as it was after the last complete task: every row up to ``committed``.

Readers open the HDF5 file with HDF5's own locking off only while they hold byte 0 of a live
writer's lock file; otherwise they open it normally.  A reader must keep its read short (the
writer waits for it: :data:`WRITER_PATIENCE` seconds at most, then writes anyway and warns),
so long readers (``verify``) read in batches.  The locks work between processes on one host
(and on file systems with POSIX locks, such as NFS with lockd); the writer removes the lock
file when it closes the results.

Public API: :func:`writer_alive`, :func:`reading` (a consistent read-only ``h5py.File``),
:func:`snapshot` (a consistent standalone copy, e.g. to fetch from another machine).
"""

from __future__ import annotations

import contextlib
import errno
import fcntl
import os
import shutil
import struct
import sys
import time
from pathlib import Path
from typing import Iterator

import h5py

from sweep.errors import UserError

LOCK_SUFFIX = ".lock"
CONSISTENT, ALIVE = 0, 1  # the two bytes of the lock file
WRITER_PATIENCE = 60.0  # seconds the writer waits for readers before writing anyway
READER_PATIENCE = 30.0  # seconds a reader waits for the writer to finish a write
POLL = 0.02


def lock_path(results: str | Path) -> Path:
    """The lock file of a results file: ``OUT.h5.lock`` beside it."""
    p = Path(results)
    return p.with_name(p.name + LOCK_SUFFIX)


OFD = getattr(fcntl, "F_OFD_SETLK", None)
_TYPES = {fcntl.LOCK_SH: fcntl.F_RDLCK, fcntl.LOCK_EX: fcntl.F_WRLCK, fcntl.LOCK_UN: fcntl.F_UNLCK}


def _lock(fd: int, mode: int, byte: int) -> None:
    """Lock (``LOCK_SH``/``LOCK_EX``) or unlock (``LOCK_UN``) one byte, without waiting."""
    if OFD is None:
        fcntl.lockf(fd, mode | (0 if mode == fcntl.LOCK_UN else fcntl.LOCK_NB), 1, byte)
        return
    # struct flock: l_type, l_whence, l_start, l_len, l_pid (0 for OFD locks), padded to 32
    fcntl.fcntl(fd, OFD, struct.pack("hhqqi4x", _TYPES[mode], os.SEEK_SET, byte, 1, 0))


def _try(fd: int, mode: int, byte: int) -> bool:
    try:
        _lock(fd, mode, byte)
        return True
    except OSError as exc:
        if exc.errno in (errno.EACCES, errno.EAGAIN):
            return False
        raise


def _wait(fd: int, mode: int, byte: int, patience: float) -> bool:
    """Take the lock on ``byte``, polling up to ``patience`` seconds; False if not taken."""
    deadline = time.monotonic() + patience
    while not _try(fd, mode, byte):
        if time.monotonic() > deadline:
            return False
        time.sleep(POLL)
    return True


def _unlock(fd: int, byte: int) -> None:
    _lock(fd, fcntl.LOCK_UN, byte)


def writer_alive(results: str | Path) -> bool:
    """Whether a sweep driver has ``results`` open for writing right now."""
    try:
        fd = os.open(lock_path(results), os.O_RDONLY)
    except FileNotFoundError:
        return False
    try:
        if _try(fd, fcntl.LOCK_SH, ALIVE):
            _unlock(fd, ALIVE)
            return False
        return True
    finally:
        os.close(fd)


class WriterLock:
    """The writer's side of the protocol (see module doc); one per open results file."""

    def __init__(self, results: str | Path) -> None:
        self.path = lock_path(results)
        self.fd: int | None = None
        self.warned = False

    def acquire_alive(self) -> None:
        """Create the lock file and hold its alive byte (raises OSError if it cannot)."""
        self.fd = os.open(self.path, os.O_RDWR | os.O_CREAT, 0o644)
        if not _try(self.fd, fcntl.LOCK_EX, ALIVE):
            os.close(self.fd)
            self.fd = None
            raise UserError(f"output {str(self.path)[:-len(LOCK_SUFFIX)]!r} is being written "
                            "by another sweep (its lock file is held); expected it to be free, "
                            "or choose another -o path")

    @contextlib.contextmanager
    def changing(self) -> Iterator[None]:
        """Hold the consistent byte while the file is changed (the caller flushes)."""
        if self.fd is None:
            yield
            return
        got = _wait(self.fd, fcntl.LOCK_EX, CONSISTENT, WRITER_PATIENCE)
        if not got and not self.warned:
            self.warned = True
            print(f"orderless: warning: a reader has held {self.path} for "
                  f"{WRITER_PATIENCE:.0f} s; writing anyway (that reader may see a partial "
                  "write)", file=sys.stderr)
        try:
            yield
        finally:
            if got:
                _unlock(self.fd, CONSISTENT)

    def release(self) -> None:
        """Remove the lock file and drop both locks (after the results file is closed)."""
        if self.fd is None:
            return
        got = _wait(self.fd, fcntl.LOCK_EX, CONSISTENT, WRITER_PATIENCE)
        with contextlib.suppress(FileNotFoundError):
            os.unlink(self.path)
        if got:
            _unlock(self.fd, CONSISTENT)
        os.close(self.fd)
        self.fd = None


def retry_blocked(opener, message: str, patience: float, pause: float = 0.1):
    """``opener()``, retried while HDF5's own lock blocks it (another process opening or
    closing the file), for ``patience`` seconds; then a UserError with ``message``."""
    deadline = time.monotonic() + patience
    while True:
        try:
            return opener()
        except BlockingIOError:
            if time.monotonic() > deadline:
                raise UserError(message) from None
            time.sleep(pause)


def _open_h5(path: Path, locking: bool) -> h5py.File:
    try:
        return h5py.File(path, "r", locking=locking)
    except BlockingIOError:
        raise
    except OSError as exc:
        text = str(exc)
        if "lock" in text and "errno = 11" in text:
            raise BlockingIOError(text) from None
        raise UserError(f"{str(path)!r} is not a readable HDF5 file ({text.splitlines()[0]}); "
                        "expected an orderless results file") from None


@contextlib.contextmanager
def _live_read(path: Path, fd: int) -> Iterator[h5py.File | None]:
    """Hold the consistent byte of a live writer's lock file and open the file unlocked;
    yields None if the lock file was replaced meanwhile (the caller starts over)."""
    if not _wait(fd, fcntl.LOCK_SH, CONSISTENT, READER_PATIENCE):
        raise UserError(f"{str(path)!r}: the running sweep has held its lock for "
                        f"{READER_PATIENCE:.0f} s; expected it to finish writing (is the driver "
                        "stopped with Ctrl-Z?)")
    try:
        try:
            same = os.fstat(fd).st_ino == os.stat(lock_path(path)).st_ino
        except FileNotFoundError:
            same = False
        if not same:
            yield None
            return
        f = _open_h5(path, locking=False)
        try:
            yield f
        finally:
            f.close()
    finally:
        _unlock(fd, CONSISTENT)


@contextlib.contextmanager
def reading(results: str | Path) -> Iterator[h5py.File]:
    """A read-only ``h5py.File`` of ``results`` that shows a consistent state, whether or not
    a sweep is writing it (keep the ``with`` block short: the writer waits for it)."""
    path = Path(results)
    if not path.is_file():
        raise UserError(f"results file {str(path)!r} does not exist, expected an .h5 file "
                        "written by `orderless run`")
    while True:
        try:
            fd = os.open(lock_path(path), os.O_RDONLY)
        except FileNotFoundError:
            fd = None
        try:
            if fd is not None and not _try(fd, fcntl.LOCK_SH, ALIVE):
                with _live_read(path, fd) as f:
                    if f is not None:
                        yield f
                        return
                continue
            if fd is not None:
                _unlock(fd, ALIVE)
        finally:
            if fd is not None:
                os.close(fd)
        f = retry_blocked(lambda: _open_h5(path, locking=True),
                          f"{str(path)!r} is open for writing in a process that does not share "
                          "it (not an orderless sweep of this version?); expected it closed",
                          READER_PATIENCE)
        with f:
            yield f
        return


def snapshot(results: str | Path, copy: str | Path) -> Path:
    """Copy ``results`` to ``copy`` as it is after the last complete task (a standalone
    results file any HDF5 reader opens); the copy appears complete or not at all."""
    src, dst = Path(results), Path(copy)
    tmp = dst.with_name(dst.name + ".copying")
    try:
        with reading(src):  # holds the consistent lock of a live writer during the copy
            shutil.copyfile(src, tmp)
        os.replace(tmp, dst)
    except OSError as exc:
        with contextlib.suppress(OSError):
            tmp.unlink()
        raise UserError(f"cannot write the copy {str(dst)!r} ({exc.strerror or exc}); "
                        "expected a writable path with room for it") from None
    return dst
