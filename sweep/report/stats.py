"""Summary statistics of a results file, per grid point.

* fraction nonseparable among the *decided* samples (separable + nonseparable; with
  ``compute.certify`` every decided verdict is certified, the rest are undecided), with a 95 %
  confidence interval from ``scipy.stats.binomtest(k, n).proportion_ci`` (Wilson by default,
  ``exact`` = Clopper-Pearson);
* quantiles (5, 25, 50, 75, 95 %) of each stored robustness over samples with a value;
* counts of certified, undecided, invalid, failed (a solve failed) and error samples;
* mean, median and maximum of each sample's share of solver time (``solve_time_share``);
* with a game quantity: the game's causal bound (LP) and the fraction of samples whose
  see-saw value exceeds it by more than 1e-6 (a certified causal-inequality violation, since
  see-saw values are achievable).
"""

from __future__ import annotations

import json
from functools import lru_cache
from typing import Any

import numpy as np
from scipy.stats import binomtest

from workers.games.causal_bound import causal_bound
from workers.games.causal_games import get_game

QUANTILES = (0.05, 0.25, 0.5, 0.75, 0.95)
VIOLATION_TOL = 1e-6


def proportion(k: int, n: int, method: str = "wilson") -> dict[str, float]:
    """Fraction k/n with its 95 % CI (nan when n = 0)."""
    if n == 0:
        return {"fraction": float("nan"), "ci_low": float("nan"), "ci_high": float("nan")}
    ci = binomtest(int(k), int(n)).proportion_ci(confidence_level=0.95, method=method)
    return {"fraction": k / n, "ci_low": float(ci.low), "ci_high": float(ci.high)}


def _quantiles(x: np.ndarray) -> dict[str, float] | None:
    x = x[np.isfinite(x)]
    if x.size == 0:
        return None
    out = {f"q{int(q * 100):02d}": float(np.quantile(x, q)) for q in QUANTILES}
    out["mean"] = float(x.mean())
    return out


@lru_cache(maxsize=8)
def game_bound(name: str) -> float:
    return float(causal_bound(get_game(name)).value)


def _str(col: np.ndarray) -> np.ndarray:
    return np.array([v.decode() if isinstance(v, bytes) else str(v) for v in col])


def point_stats(rows: np.ndarray, game: str | None, method: str) -> dict[str, Any]:
    """Statistics of the sample rows of one grid point."""
    verdict, status = _str(rows["verdict"]), _str(rows["status"])
    sep, non = int(np.sum(verdict == "separable")), int(np.sum(verdict == "nonseparable"))
    out: dict[str, Any] = {
        "n": int(len(rows)), "separable": sep, "nonseparable": non,
        "undecided": int(np.sum(verdict == "undecided")),
        "certified": int(np.sum(rows["certified"])) if "certified" in rows.dtype.names else 0,
        "invalid": int(np.sum(status == "invalid")), "failed": int(np.sum(status == "failed")),
        "error": int(np.sum(status == "error")),
        "nonseparable_fraction": proportion(non, sep + non, method),
    }
    for kind in ("random", "generalized"):
        for suffix in ("", "_lo", "_hi"):  # _lo/_hi: bounds (N >= 4 has no exact value)
            q = _quantiles(rows[f"r_{kind}{suffix}"])
            if q is not None:
                out[f"r_{kind}{suffix}"] = q
    t = rows["solve_time_share"][np.isfinite(rows["solve_time_share"])]
    if t.size:
        out["solve_time_share"] = {"mean": float(t.mean()), "median": float(np.median(t)),
                                   "max": float(t.max())}
    if game is not None:
        g = rows["game_value"][np.isfinite(rows["game_value"])]
        bound = game_bound(game)
        out["game"] = {"name": game, "causal_bound": bound, "n": int(g.size),
                       "max_value": float(g.max()) if g.size else float("nan"),
                       "violating": proportion(int(np.sum(g > bound + VIOLATION_TOL)),
                                               int(g.size), method)}
    return out


def summarise(attrs: dict[str, Any], samples: np.ndarray, points: np.ndarray,
              method: str = "wilson") -> dict[str, Any]:
    """Per-grid-point statistics of a results file (see module doc)."""
    spec = json.loads(attrs["spec_json"])
    game = (spec["compute"].get("game") or {}).get("name")
    axes = json.loads(attrs["axes"])
    per_point = []
    for p in range(len(points)):
        rows = samples[samples["point"] == p]
        entry = {"point": p, "coords": dict(zip(axes, map(float, points[p])))}
        entry.update(point_stats(rows, game, method))
        per_point.append(entry)
    runs = json.loads(attrs["runs"])
    return {"spec_hash": attrs["spec_hash"], "n_samples": int(attrs["n_samples"]),
            "stored": int(len(samples)), "complete": len(samples) == int(attrs["n_samples"]),
            "live": bool(attrs.get("live", False)),
            "state": runs[-1]["state"] if runs else "none",
            "family": spec["family"], "axes": axes, "ci_method": method,
            "runs": runs, "points": per_point}


CI_NAMES = {"wilson": "Wilson score", "exact": "Clopper-Pearson (exact)"}


def strict_json(value: Any) -> Any:
    """``value`` with nan and infinities as None, so ``json.dumps`` writes strict JSON
    (a fraction over zero decided samples is nan)."""
    if isinstance(value, float) and not np.isfinite(value):
        return None
    if isinstance(value, dict):
        return {k: strict_json(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [strict_json(v) for v in value]
    return value


def to_json(summary: dict[str, Any]) -> str:
    """The summary as strict JSON (``orderless summary --json``)."""
    return json.dumps(strict_json(summary), indent=2, allow_nan=False)


def _fmt(x: float) -> str:
    return "nan" if not np.isfinite(x) else f"{x:.4g}"


def _status_line(summary: dict[str, Any]) -> str:
    if summary["live"]:
        return "  (sweep still running: `orderless status` shows its progress)"
    if summary["complete"]:
        return ""
    if summary["state"] == "dead":
        return "  (incomplete: the last run died without recording its end; rerun to resume)"
    return "  (incomplete: rerun to resume)"


def format_table(summary: dict[str, Any]) -> str:
    """A plain-text table, one line per grid point; each column as wide as its widest
    entry, so long intervals do not shift the columns after them."""
    fam = summary["family"]
    head = (f"family: {fam.get('kind')} {fam.get('name') or fam.get('measure') or ''}  "
            f"samples stored: {summary['stored']}/{summary['n_samples']}"
            f"{_status_line(summary)}\n"
            f"(frac: fraction nonseparable of the certified verdicts, 95% CI: "
            f"{CI_NAMES.get(summary['ci_method'], summary['ci_method'])}; R_r med: median "
            "random robustness, or of its upper bound where only bounds exist, as max(R, 0); "
            "t_solve: median solver seconds per sample)")
    cols = summary["axes"] + ["n", "cert", "nonsep", "frac", "95% CI", "undec", "invalid",
                              "failed", "error", "R_r med", "t_solve"]
    has_game = any("game" in p for p in summary["points"])
    cols += ["game viol"] if has_game else []
    rows = []
    for p in summary["points"]:
        fr = p["nonseparable_fraction"]
        vals = [_fmt(p["coords"][a]) for a in summary["axes"]] + [
            str(p["n"]), str(p["certified"]), str(p["nonseparable"]), _fmt(fr["fraction"]),
            f"[{_fmt(fr['ci_low'])}, {_fmt(fr['ci_high'])}]", str(p["undecided"]),
            str(p["invalid"]), str(p["failed"]), str(p["error"]),
            _fmt(max(p.get("r_random", p.get("r_random_hi", {})).get("q50", float("nan")),
                     0.0)),
            _fmt(p.get("solve_time_share", {}).get("median", float("nan")))]
        if has_game:
            vals.append(_fmt(p["game"]["violating"]["fraction"]))
        rows.append(vals)
    widths = [max([len(c)] + [len(r[j]) for r in rows]) for j, c in enumerate(cols)]
    lines = [head, "  ".join(c.rjust(w) for c, w in zip(cols, widths))]
    lines += ["  ".join(v.rjust(w) for v, w in zip(r, widths)) for r in rows]
    return "\n".join(lines)
