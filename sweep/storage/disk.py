"""The file system under a results file: its free space, whether it is mounted read-only, and
the one-line reason of an OS error (checked by :mod:`sweep.storage.writer` before each write:
HDF5 itself crashes the process when a write fails with the disk full)."""

from __future__ import annotations

import os
from pathlib import Path


def free_bytes(folder: Path) -> int:
    """Bytes available to this user in the file system of ``folder``."""
    st = os.statvfs(folder)
    return st.f_bavail * st.f_frsize


def os_reason(exc: OSError) -> str:
    """The reason of ``exc`` on one line."""
    return exc.strerror or str(exc).splitlines()[0]


def read_only(folder: Path) -> bool:
    """Whether ``folder``'s file system is mounted read-only (False when unknown)."""
    try:
        return bool(os.statvfs(folder).f_flag & os.ST_RDONLY)
    except OSError:
        return False
