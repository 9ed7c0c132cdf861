"""Figures of a results file (matplotlib, Agg back-end, no display needed).

Left: fraction nonseparable against one grid axis with its 95 % CI band (one line per value
of the other axes).  Right: histogram of the random (or generalised) robustness over all
samples that have one.
"""

from __future__ import annotations

from typing import Any

import numpy as np

from .errors import UserError


def _series(summary: dict[str, Any], axis: str) -> dict[tuple, list]:
    others = [a for a in summary["axes"] if a != axis]
    out: dict[tuple, list] = {}
    for p in summary["points"]:
        key = tuple((a, p["coords"][a]) for a in others)
        fr = p["nonseparable_fraction"]
        out.setdefault(key, []).append((p["coords"][axis], fr["fraction"], fr["ci_low"],
                                        fr["ci_high"]))
    return out


def pick_axis(summary: dict[str, Any], axis: str | None) -> str | None:
    axes = summary["axes"]
    if axis is None:
        return axes[0] if axes else None
    if axis not in axes:
        raise UserError(f"--axis {axis!r} is not a grid axis of this file; axes: {axes}")
    return axis


def make_figure(summary: dict[str, Any], samples: np.ndarray, path: str,
                axis: str | None = None) -> None:
    """Write the two-panel figure to ``path`` (format from its suffix)."""
    import matplotlib
    matplotlib.use("Agg")
    import matplotlib.pyplot as plt
    axis = pick_axis(summary, axis)
    fig, (ax1, ax2) = plt.subplots(1, 2, figsize=(10, 4))
    if axis is None:
        fr = summary["points"][0]["nonseparable_fraction"]
        ax1.errorbar([0], [fr["fraction"]], yerr=[[fr["fraction"] - fr["ci_low"]],
                     [fr["ci_high"] - fr["fraction"]]], fmt="o")
        ax1.set_xticks([])
    for key, pts in _series(summary, axis).items() if axis else ():
        x, f, lo, hi = map(np.array, zip(*sorted(pts)))
        label = ", ".join(f"{a}={v:g}" for a, v in key) or None
        ax1.plot(x, f, marker="o", label=label)
        ax1.fill_between(x, lo, hi, alpha=0.25)
        ax1.set_xlabel(axis)
    ax1.set_ylim(-0.02, 1.02)
    ax1.set_ylabel("fraction nonseparable (95% CI)")
    if any(ax1.get_legend_handles_labels()[1]):
        ax1.legend(fontsize=7)
    kind = "random" if np.isfinite(samples["r_random"]).any() else "generalized"
    r = samples[f"r_{kind}"][np.isfinite(samples[f"r_{kind}"])]
    ax2.hist(r, bins=min(40, max(5, r.size // 5 or 5)))
    ax2.set_xlabel(f"{kind} robustness")
    ax2.set_ylabel("samples")
    fam = summary["family"]
    fig.suptitle(f"{fam.get('kind')} {fam.get('name') or fam.get('measure') or ''}: "
                 f"{summary['stored']} samples")
    fig.tight_layout()
    try:
        fig.savefig(path)
    except (OSError, ValueError) as exc:
        raise UserError(f"-o {path!r}: cannot write the figure ({exc})") from None
    finally:
        plt.close(fig)
