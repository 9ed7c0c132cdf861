"""The dask task: a batch of samples solved together gives each sample the row it gets alone,
and one failing sample does not take the others with it."""

import numpy as np

from sweep.execution.execute import auto_task_size
from sweep.planning.plan import Plan
from sweep.spec.model import parse_spec
from sweep.spec.run import RunSpec
from sweep.planning.task import compute_sample, compute_samples

SPEC = {"scenario": {"dims": [2, 2, 2, 2]},
        "family": {"kind": "ensemble", "measure": "valid_direction"},
        "compute": {"samples": 6, "seed": 3, "robustness": ["random", "generalized"]},
        "run": {"cluster": "serial", "progress": False}}

KEYS = ("verdict", "r_random", "r_generalized", "iterations", "certified", "cert_margin")


def test_batch_rows_equal_single_rows():
    plan = Plan(parse_spec(SPEC))
    together = compute_samples(plan, list(range(6)))
    for i, row in enumerate(together):
        alone = compute_sample(plan, i)
        assert row["status"] == "ok" and row["solver_status"] == "optimal"
        for key in KEYS:
            assert alone[key] == row[key] or (np.isnan(alone[key]) and np.isnan(row[key])), key


class _OneBadPlan(Plan):
    """Sample 2 leaves the valid subspace (with validity checks off, its solve raises)."""

    def operator(self, index):
        W, aux = super().operator(index)
        if index == 2:
            W = W + 0.1 * np.diag(np.tile([1.0, -1.0], 8))
        return W, aux


def test_error_in_one_sample_spares_the_batch():
    spec = parse_spec({**SPEC, "compute": {**SPEC["compute"], "validity": False}})
    rows = compute_samples(_OneBadPlan(spec), [0, 1, 2, 3])
    assert [r["status"] for r in rows] == ["ok", "ok", "error", "ok"]
    assert "not in the valid subspace" in rows[2]["message"]
    good = compute_samples(Plan(spec), [0, 1, 3])
    assert [r["r_random"] for r in good] == [rows[i]["r_random"] for i in (0, 1, 3)]


def test_auto_task_size_batches_and_balances():
    """At most 32 samples per task, and at least 8 tasks per worker."""
    assert auto_task_size(10_000, RunSpec(workers=2)) == 32
    assert auto_task_size(200, RunSpec(workers=2)) == 13
    assert auto_task_size(5, RunSpec(workers=4)) == 1
    assert auto_task_size(200, RunSpec(cluster="serial")) == 32


def test_warm_started_grid_matches_cold():
    """compute.warm_start chains SCS solves along a task's grid points: same certified
    verdicts and robustness within the solver's accuracy as cold solves (OCB white-noise
    grid; R_r = max(0, sqrt2 p - 1), workers/THEORY.md §5)."""
    base = {"family": {"kind": "named", "name": "ocb"},
            "grid": [{"param": "weight", "start": 0.5, "stop": 1.0, "num": 11}],
            "compute": {"solver": "SCS", "eps": 1e-9},
            "run": {"cluster": "serial", "progress": False}}
    cold = compute_samples(Plan(parse_spec(base)), list(range(11)))
    warm_spec = parse_spec({**base, "compute": {**base["compute"], "warm_start": True}})
    warm = compute_samples(Plan(warm_spec), list(range(11)))
    for c, w, p in zip(cold, warm, np.linspace(0.5, 1.0, 11)):
        assert w["certified"] and w["verdict"] == c["verdict"]
        assert abs(w["r_random"] - max(0.0, np.sqrt(2) * p - 1)) < 1e-5
    assert sum(r["iterations"] for r in warm) < sum(r["iterations"] for r in cold)
