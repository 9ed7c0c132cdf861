"""Figures of a results file (matplotlib, Agg back-end, no display needed).

Left: fraction nonseparable of the certified verdicts against one grid axis, with its 95 %
confidence band (the summary's method: Wilson score or Clopper-Pearson), one line per value
of the other axes.  Right: the random robustness against the same axis, median and
25-75 % band over the samples of each point; for N >= 4 parties, where only bounds exist,
the medians of the lower (necessary) and upper (sufficient) bounds with the region between
them.  Without a grid the right panel is a histogram of the robustness values above the
decision threshold, with the separable samples at 0 counted in the legend instead of
drawn (they would dwarf the rest).  Known thresholds of named families are marked
(:data:`KNOWN`).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any, Callable

import numpy as np

from sweep.errors import UserError
from .stats import CI_NAMES


@dataclass(frozen=True)
class Known:
    """A published threshold along a grid axis, and the robustness curve if known."""

    x: float
    label: str
    robustness: Callable[[np.ndarray], np.ndarray] | None = None


# OCB process with white noise, p W + (1-p) 1°: R_r = max(0, sqrt2 p - 1), separable exactly
# for p <= 1/sqrt2 (workers/THEORY.md §5; Araujo et al., NJP 17, 102001 (2015))
KNOWN: dict[tuple[str, str], Known] = {
    ("ocb", "weight"): Known(1 / np.sqrt(2), "1/√2: OCB + white noise separable below "
                             "(Araújo et al. 2015)",
                             lambda p: np.maximum(0.0, np.sqrt(2) * p - 1)),
}


def _series(summary: dict[str, Any], axis: str, value) -> dict[tuple, list]:
    others = [a for a in summary["axes"] if a != axis]
    out: dict[tuple, list] = {}
    for p in summary["points"]:
        key = tuple((a, p["coords"][a]) for a in others)
        out.setdefault(key, []).append((p["coords"][axis], *value(p)))
    return {k: sorted(v) for k, v in out.items()}


def pick_axis(summary: dict[str, Any], axis: str | None) -> str | None:
    axes = summary["axes"]
    if axis is None:
        return axes[0] if axes else None
    if axis not in axes:
        raise UserError(f"--axis {axis!r} is not a grid axis of this file; axes: {axes}")
    return axis


def _known(summary: dict[str, Any], axis: str | None) -> Known | None:
    fam = summary["family"]
    return KNOWN.get((fam.get("name"), axis)) if fam.get("kind") == "named" else None


def _fraction(p: dict[str, Any]) -> tuple[float, float, float]:
    fr = p["nonseparable_fraction"]
    return fr["fraction"], fr["ci_low"], fr["ci_high"]


def _quantiles(p: dict[str, Any], key: str) -> tuple[float, float, float]:
    q = p.get(key)
    if q is None:
        return (np.nan,) * 3
    return tuple(max(q[k], 0.0) for k in ("q50", "q25", "q75"))  # R >= 0; lower bounds dip


def _robustness_keys(summary: dict[str, Any]) -> tuple[str, list[str]]:
    """(quantity name, stored columns): the exact value, or the two bounds (N >= 4)."""
    pts = summary["points"]
    for kind in ("random", "generalized"):
        if any(f"r_{kind}" in p for p in pts):
            return kind, [f"r_{kind}"]
        if any(f"r_{kind}_hi" in p for p in pts):
            return kind, [f"r_{kind}_lo", f"r_{kind}_hi"]
    return "random", []


def _left(ax, summary: dict[str, Any], axis: str | None, known: Known | None) -> None:
    if axis is None:
        f, lo, hi = _fraction(summary["points"][0])
        ax.errorbar([0], [f], yerr=[[f - lo], [hi - f]], fmt="o")
        ax.set_xticks([])
    for key, pts in (_series(summary, axis, _fraction).items() if axis else ()):
        x, f, lo, hi = map(np.array, zip(*pts))
        label = ", ".join(f"{a}={v:g}" for a, v in key) or None
        ax.plot(x, f, marker="o", label=label)
        ax.fill_between(x, lo, hi, alpha=0.25)
    if axis:
        ax.set_xlabel(axis)
    if known is not None:
        ax.axvline(known.x, color="k", ls=":", lw=1, label=known.label)
    ax.set_ylim(-0.02, 1.02)
    ax.set_ylabel(f"fraction nonseparable\n(95% {CI_NAMES.get(summary['ci_method'])} CI)")
    if any(ax.get_legend_handles_labels()[1]):
        ax.legend(fontsize=7)


def _right_grid(ax, summary: dict[str, Any], axis: str, known: Known | None) -> None:
    kind, keys = _robustness_keys(summary)
    names = {f"r_{kind}": "median", f"r_{kind}_lo": "lower bound (necessary), median",
             f"r_{kind}_hi": "upper bound (sufficient), median"}
    for key in keys:
        for other, pts in _series(summary, axis, lambda p: _quantiles(p, key)).items():
            x, med, q25, q75 = map(np.array, zip(*pts))
            label = ", ".join([names[key]] + [f"{a}={v:g}" for a, v in other])
            ax.plot(x, med, marker="o", label=label)
            ax.fill_between(x, q25, q75, alpha=0.2)
    if known is not None and known.robustness is not None and kind == "random":
        xs = np.linspace(*ax.get_xlim(), 200) if keys else np.linspace(0, 1, 200)
        ax.plot(xs, known.robustness(xs), "k--", lw=1, label="R_r = max(0, √2 p − 1)")
        ax.axvline(known.x, color="k", ls=":", lw=1)
    ax.set_xlabel(axis)
    ax.set_ylabel(f"{kind} robustness (25-75% band)")
    if any(ax.get_legend_handles_labels()[1]):
        ax.legend(fontsize=7)


def _right_histogram(ax, summary: dict[str, Any], samples: np.ndarray, tol: float) -> None:
    kind, keys = _robustness_keys(summary)
    for key in keys:
        r = samples[key][np.isfinite(samples[key])]
        at_zero = int(np.sum(r <= tol))
        shown = r[r > tol]
        label = {f"r_{kind}_lo": "lower bound", f"r_{kind}_hi": "upper bound"}.get(key, kind)
        ax.hist(shown, bins=min(40, max(5, shown.size // 5 or 5)), alpha=0.6,
                label=f"{label}: {shown.size} above tol; {at_zero} at 0 (separable, not drawn)")
    ax.set_xlabel(f"{kind} robustness")
    ax.set_ylabel("samples")
    if any(ax.get_legend_handles_labels()[1]):
        ax.legend(fontsize=7)


def figure(summary: dict[str, Any], samples: np.ndarray, axis: str | None = None,
           tol: float = 1e-6):
    """The two-panel matplotlib figure (see module doc); the caller closes it."""
    import matplotlib
    matplotlib.use("Agg")
    import matplotlib.pyplot as plt
    axis = pick_axis(summary, axis)
    known = _known(summary, axis)
    fig, (ax1, ax2) = plt.subplots(1, 2, figsize=(11, 4.2))
    _left(ax1, summary, axis, known)
    if axis is None:
        _right_histogram(ax2, summary, samples, tol)
    else:
        _right_grid(ax2, summary, axis, known)
    fam = summary["family"]
    state = "  (sweep still running)" if summary.get("live") else (
        "" if summary["complete"] else "  (incomplete)")
    fig.suptitle(f"{fam.get('kind')} {fam.get('name') or fam.get('measure') or ''}: "
                 f"{summary['stored']}/{summary['n_samples']} samples{state}")
    fig.tight_layout()
    return fig


def make_figure(summary: dict[str, Any], samples: np.ndarray, path: str,
                axis: str | None = None, tol: float = 1e-6) -> None:
    """Write the two-panel figure to ``path`` (format from its suffix)."""
    import matplotlib.pyplot as plt
    fig = figure(summary, samples, axis, tol)
    try:
        fig.savefig(path)
    except (OSError, ValueError) as exc:
        raise UserError(f"-o {path!r}: cannot write the figure ({exc})") from None
    finally:
        plt.close(fig)
