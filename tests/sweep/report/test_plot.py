"""Figures: robustness against the grid axis (bounds for N >= 4), the CI method named, known
thresholds marked; quadripartite_tiny.yaml shows what its text says."""

from pathlib import Path

import numpy as np
import pytest

from sweep.execution.execute import run_sweep
from sweep.report.plot import figure
from sweep.storage.results import read_results
from sweep.spec.model import load_spec, parse_spec
from sweep.report.stats import summarise
from tests.sweep.conftest import ocb_grid

REPO = Path(__file__).resolve().parents[3]


def _labels(ax):
    return [line.get_label() for line in ax.get_lines()]


def test_ocb_grid_marks_the_threshold_and_the_curve(tmp_path):
    """OCB with white noise: R_r = max(0, sqrt2 p - 1), separable for p <= 1/sqrt2
    (workers/THEORY.md §5; Araujo et al. 2015) drawn with the medians, which lie on it."""
    import matplotlib.pyplot as plt
    out = tmp_path / "o.h5"
    run_sweep(parse_spec(ocb_grid([0.5, 0.7, 0.8, 1.0])), str(out))
    attrs, samples, points = read_results(out)
    fig = figure(summarise(attrs, samples, points, method="exact"), samples)
    try:
        left, right = fig.axes
        assert "Clopper-Pearson" in left.get_ylabel()
        assert any("1/√2" in label for label in _labels(left))
        x = [line for line in left.get_lines() if "1/√2" in line.get_label()][0].get_xdata()
        assert x[0] == pytest.approx(1 / np.sqrt(2))
        med = [line for line in right.get_lines() if line.get_label() == "median"][0]
        assert np.allclose(med.get_ydata(), np.maximum(0, np.sqrt(2) * med.get_xdata() - 1),
                           atol=1e-5)
        assert "R_r = max(0, √2 p − 1)" in _labels(right)
    finally:
        plt.close(fig)


@pytest.mark.slow
def test_quadripartite_example_bounds_and_plot(tmp_path):
    """job_specs/quadripartite_tiny.yaml: every sample separable or undecided (never
    nonseparable: its valid operators are combs of B < A < C < D), both bounds stored and
    drawn against u, the undecided one at u = 1 as the text says."""
    import matplotlib.pyplot as plt

    from sweep.planning.plan import Plan
    from workers.operators.masks import comb_mask, valid_mask
    spec = load_spec(REPO / "job_specs" / "quadripartite_tiny.yaml")
    scen = Plan(spec).scenario
    assert not np.any(valid_mask(scen) & ~comb_mask(scen, (1, 0, 2, 3)))
    out = tmp_path / "q.h5"
    run_sweep(spec, str(out), spec.run.model_copy(update={"cluster": "serial",
                                                         "progress": False}))
    attrs, samples, points = read_results(out)
    assert set(samples["verdict"]) <= {b"separable", b"undecided"}
    assert np.isnan(samples["r_random"]).all() and np.isfinite(samples["r_random_hi"]).all()
    undecided = samples[samples["verdict"] == b"undecided"]
    assert len(undecided) == 1 and points[undecided["point"][0]][0] == 1.0
    fig = figure(summarise(attrs, samples, points), samples)
    try:
        labels = _labels(fig.axes[1])
        assert "lower bound (necessary), median" in labels
        assert "upper bound (sufficient), median" in labels
    finally:
        plt.close(fig)


def test_without_grid_the_separable_spike_is_counted_not_drawn(tmp_path):
    import matplotlib.pyplot as plt
    out = tmp_path / "c.h5"
    run_sweep(parse_spec({"scenario": {"dims": [2, 2, 2, 2]},
                          "family": {"kind": "ensemble", "measure": "valid_direction",
                                     "u": 1.0},
                          "compute": {"samples": 12, "seed": 1},
                          "run": {"cluster": "serial", "progress": False}}), str(out))
    attrs, samples, points = read_results(out)
    fig = figure(summarise(attrs, samples, points), samples)
    try:
        (label,) = fig.axes[1].get_legend_handles_labels()[1]
        zero = int(np.sum(samples["r_random"] <= 1e-6))
        assert f"{12 - zero} above tol; {zero} at 0 (separable, not drawn)" in label
    finally:
        plt.close(fig)
