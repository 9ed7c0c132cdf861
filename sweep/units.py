"""Human-readable sizes and durations for messages (no heavy imports: ``orderless status``
uses them and should start fast)."""

from __future__ import annotations


def human_bytes(n: float) -> str:
    """``1234567`` -> ``"1.2 MB"`` (decimal units)."""
    for unit in ("B", "KB", "MB", "GB", "TB", "PB"):
        if abs(n) < 1000 or unit == "PB":
            return f"{n:.0f} {unit}" if unit == "B" else f"{n:.1f} {unit}"
        n /= 1000
    return f"{n:.1f} PB"


def human_seconds(s: float) -> str:
    """``0.5`` -> ``"0.5 s"``, ``5400`` -> ``"1.5 h"``."""
    if s < 1:
        return f"{s:.2g} s"
    for unit, size in (("d", 86400), ("h", 3600), ("min", 60)):
        if s >= size:
            return f"{s / size:.1f} {unit}"
    return f"{s:.0f} s"
