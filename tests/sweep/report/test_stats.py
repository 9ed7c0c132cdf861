"""Summary statistics: CIs against scipy, and two ground truths run end to end."""

import numpy as np
import pytest
from scipy.stats import binomtest

from sweep.execution.execute import run_sweep
from sweep.spec.model import parse_spec
from sweep.report.stats import point_stats, proportion, summarise
from sweep.storage.results import SAMPLE_DTYPE, read_results
from tests.sweep.conftest import ocb_grid


@pytest.mark.parametrize("k,n", [(0, 10), (3, 10), (10, 10), (17, 40)])
@pytest.mark.parametrize("method", ["wilson", "exact"])
def test_ci_matches_scipy_binomtest(k, n, method):
    """95 % CI equals scipy.stats.binomtest(k, n).proportion_ci (Wilson / Clopper-Pearson)."""
    ci = binomtest(k, n).proportion_ci(confidence_level=0.95, method=method)
    got = proportion(k, n, method)
    assert got["fraction"] == k / n
    assert (got["ci_low"], got["ci_high"]) == pytest.approx((ci.low, ci.high), abs=1e-15)


def test_point_stats_counts_and_quantiles():
    """Counts per verdict/status; quantiles equal numpy.quantile over the finite values."""
    rows = np.zeros(6, dtype=SAMPLE_DTYPE)
    rows["verdict"] = [b"separable", b"nonseparable", b"nonseparable", b"undecided", b"", b""]
    rows["status"] = [b"ok", b"ok", b"ok", b"failed", b"invalid", b"error"]
    r = np.array([0.0, 0.2, 0.4, np.nan, np.nan, np.nan])
    rows["r_random"], rows["solve_time_share"] = r, [1, 2, 3, 4, np.nan, np.nan]
    for f in ("r_generalized", "r_random_lo", "r_random_hi", "r_generalized_lo",
              "r_generalized_hi", "game_value"):
        rows[f] = np.nan
    st = point_stats(rows, None, "wilson")
    assert (st["separable"], st["nonseparable"], st["undecided"]) == (1, 2, 1)
    assert (st["failed"], st["invalid"], st["error"]) == (1, 1, 1)
    assert st["nonseparable_fraction"]["fraction"] == pytest.approx(2 / 3)
    assert st["r_random"]["q50"] == pytest.approx(np.quantile([0, 0.2, 0.4], 0.5))
    assert st["solve_time_share"]["max"] == 4


def test_ocb_white_noise_grid_changes_verdict_at_inverse_sqrt2(tmp_path):
    """workers/THEORY.md §5 (Araujo et al. 2015): p W_OCB + (1-p) 1° is nonseparable iff
    p > 1/sqrt2, since R_r(W_OCB) = sqrt2 - 1.  Derived from the definition of R_r: mixing
    more noise into p W + (1-p) 1° only lowers the weight of W to p/(1+r), so
    R_r(p) = max(0, sqrt2 p - 1)."""
    c = 1 / np.sqrt(2)
    weights = [0.5, c - 0.01, c - 0.002, c + 0.002, c + 0.01, 1.0]
    spec = parse_spec(ocb_grid(weights, eps=1e-8))
    run_sweep(spec, str(tmp_path / "ocb.h5"))
    summ = summarise(*read_results(tmp_path / "ocb.h5"))
    fractions = [p["nonseparable_fraction"]["fraction"] for p in summ["points"]]
    assert fractions == [0, 0, 0, 1, 1, 1]
    for w, p in zip(weights, summ["points"]):
        assert p["r_random"]["q50"] == pytest.approx(max(0.0, np.sqrt(2) * w - 1), abs=1e-6)


def test_sweep_of_random_combs_is_never_nonseparable(tmp_path):
    """Ground truth (workers/THEORY.md §6 and 8): causally ordered combs and their mixtures are
    separable, so the fraction nonseparable is 0 (with eps 1e-8 none is undecided either)."""
    for measure in ("comb", "comb_mixture"):
        spec = parse_spec({"scenario": {"dims": [2, 2, 2, 2]},
                           "family": {"kind": "ensemble", "measure": measure},
                           "compute": {"samples": 12, "seed": 5, "eps": 1e-8},
                           "run": {"cluster": "serial", "progress": False}})
        out = tmp_path / f"{measure}.h5"
        run_sweep(spec, str(out))
        p = summarise(*read_results(out))["points"][0]
        assert p["nonseparable"] == 0 and p["separable"] == 12, p
        assert p["nonseparable_fraction"]["ci_high"] == pytest.approx(
            binomtest(0, 12).proportion_ci(method="wilson").high)
