"""Reading process operators from files: ``.npy`` (never with pickle) and plain text.

Plain text: one matrix row per line, entries separated by white space or commas; complex
entries are written as Python complex literals (``0.5+0.1j``).
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

from sweep.errors import UserError

TEXT_SUFFIXES = (".txt", ".dat", ".csv", ".tsv")


def read_operator(path: str | Path) -> np.ndarray:
    """Load a square matrix from ``path``; a one-line :class:`UserError` on any problem."""
    p = Path(path)
    if not p.exists():
        raise UserError(f"{p}: no such file")
    if p.is_dir():
        raise UserError(f"{p}: is a directory, expected a .npy or text matrix file")
    suffix = p.suffix.lower()
    if suffix == ".npy":
        try:
            M = np.load(p, allow_pickle=False)
        except ValueError as exc:
            raise UserError(f"{p}: not a plain .npy array ({str(exc).splitlines()[0]})") from None
        except Exception as exc:  # noqa: BLE001 - any unreadable file is the user's to fix
            raise UserError(f"{p}: unreadable .npy file ({type(exc).__name__})") from None
    elif suffix in TEXT_SUFFIXES:
        M = _read_text(p)
    else:
        raise UserError(f"{p}: unknown file type {suffix!r}, expected .npy or one of "
                        f"{', '.join(TEXT_SUFFIXES)}")
    if M.dtype.kind not in "fciub":
        raise UserError(f"{p}: array of dtype {M.dtype}, expected real or complex numbers")
    if M.ndim != 2 or M.shape[0] != M.shape[1]:
        raise UserError(f"{p}: array of shape {M.shape}, expected a square matrix")
    if not np.all(np.isfinite(M)):
        raise UserError(f"{p}: matrix has non-finite entries (nan or inf)")
    return M.astype(complex)


def _read_text(p: Path) -> np.ndarray:
    rows = []
    try:
        text = p.read_text()
    except UnicodeDecodeError:
        raise UserError(f"{p}: not a text file, expected one matrix row per line") from None
    for lineno, line in enumerate(text.splitlines(), 1):
        line = line.split("#", 1)[0].strip()
        if not line:
            continue
        fields = line.replace(",", " ").split()
        try:
            rows.append([complex(f.replace("i", "j")) for f in fields])
        except ValueError:
            raise UserError(f"{p}:{lineno}: cannot read a number in {line[:60]!r}") from None
    if not rows:
        raise UserError(f"{p}: file holds no matrix rows")
    if len({len(r) for r in rows}) != 1:
        raise UserError(f"{p}: rows have different lengths {sorted({len(r) for r in rows})}")
    return np.array(rows)


def parse_dims(text: str) -> list[int]:
    """``"2,2,2,2"`` -> [2, 2, 2, 2], with a one-line error naming ``--dims``."""
    try:
        dims = [int(x) for x in text.replace(" ", "").split(",") if x != ""]
    except ValueError:
        raise UserError(f"--dims={text!r}: expected comma-separated integers, "
                        "input then output dimension of each party (e.g. 2,2,2,2)") from None
    if not dims or len(dims) % 2 or any(d < 1 for d in dims):
        raise UserError(f"--dims={text!r}: expected an even number of integers >= 1, input then "
                        "output dimension of each party (e.g. 2,2,2,2)")
    return dims
