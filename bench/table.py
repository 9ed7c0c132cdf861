"""The benchmark table: one :class:`Row` per target, its Markdown form, the peak memory."""

from __future__ import annotations

from dataclasses import dataclass


@dataclass(frozen=True)
class Row:
    """One line of the benchmark table."""

    target: str
    instances: int
    fast_median: float
    base_median: float
    max_diff: float
    peak_mib: float
    note: str = ""

    @property
    def ratio(self) -> float:
        return self.base_median / self.fast_median if self.fast_median > 0 else float("nan")


def peak_mib() -> float:
    """Peak resident memory of this process in MiB (Linux reports KiB)."""
    import resource

    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024.0


def format_table(rows: list[Row]) -> str:
    head = ("| target | instances | fast s/sample | baseline s/sample | ratio | max diff | "
            "peak MiB | note |\n|---|---|---|---|---|---|---|---|")
    lines = [head]
    for r in rows:
        lines.append(f"| {r.target} | {r.instances} | {r.fast_median:.4g} | {r.base_median:.4g} "
                     f"| {r.ratio:.3g} | {r.max_diff:.2e} | {r.peak_mib:.0f} | {r.note} |")
    return "\n".join(lines)
