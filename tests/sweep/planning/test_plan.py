"""Planning: grid order, per-sample seeds (numpy SeedSequence spawn), and independence of the
results from task grouping (workers/THEORY.md §8: one root seed, one child seed per sample)."""

import numpy as np

from sweep.execution.execute import run_sweep
from sweep.planning.plan import Plan, sample_seed
from sweep.spec.model import parse_spec
from sweep.storage.results import read_results

SPEC = {"scenario": {"dims": [2, 2, 2, 2]},
        "family": {"kind": "ensemble", "measure": "valid_direction"},
        "grid": [{"param": "u", "values": [0.5, 1.0]}, {"param": "weight", "values": [0.9, 1.0]}],
        "compute": {"samples": 3, "seed": 42, "store_operators": True},
        "run": {"cluster": "serial", "progress": False}}


def test_sample_seed_is_the_spawned_child():
    """SeedSequence(root).spawn(n)[i] and SeedSequence(root, spawn_key=(i,)) coincide (numpy
    documentation of SeedSequence.spawn), so a sample's seed needs only the root and i."""
    kids = np.random.SeedSequence(42).spawn(5)
    for i, kid in enumerate(kids):
        assert np.array_equal(kid.generate_state(4), sample_seed(42, i).generate_state(4))


def test_grid_is_the_product_last_axis_fastest():
    plan = Plan(parse_spec(SPEC))
    assert plan.points == [(0.5, 0.9), (0.5, 1.0), (1.0, 0.9), (1.0, 1.0)]
    assert plan.n_samples == 12 and plan.locate(7) == (2, 1)
    fam = plan.family_at(2)
    assert (fam.u, fam.weight) == (1.0, 0.9)


def test_results_do_not_depend_on_task_size_and_any_sample_recomputes(tmp_path):
    """Two runs with different samples per task store identical operators, verdicts and
    robustness values, and each stored operator equals the one Plan.operator(i) recomputes
    alone."""
    outs = []
    for per_task in (1, 5):
        spec = parse_spec({**SPEC, "run": {**SPEC["run"], "samples_per_task": per_task}})
        path = tmp_path / f"t{per_task}.h5"
        run_sweep(spec, str(path))
        import h5py
        with h5py.File(path, "r") as f:
            order = np.argsort(f["samples"]["index"])
            outs.append((f["samples"][()][order], f["operators"][()][order]))
    (s1, o1), (s5, o5) = outs
    assert np.array_equal(o1, o5)
    assert np.array_equal(s1["verdict"], s5["verdict"])
    # the batched solver's answers are bit-identical too (per-sample arithmetic in a batch)
    np.testing.assert_array_equal(s1["r_random"], s5["r_random"])
    np.testing.assert_array_equal(s1["iterations"], s5["iterations"])
    assert np.array_equal(s1["seed"], s5["seed"])
    plan = Plan(parse_spec(SPEC))
    for i in (0, 7, 11):
        assert np.array_equal(plan.operator(i)[0], o1[i])
    _, samples, _ = read_results(tmp_path / "t1.h5")
    assert len(samples) == 12


def test_invalid_operator_is_a_status_not_an_abort(tmp_path):
    """A files family with an invalid operator: status 'invalid', the sweep completes."""
    good = np.eye(16) / 4  # white noise for two qubit parties, valid
    bad = np.eye(16) / 2   # trace 8, expected 4
    np.save(tmp_path / "ops.npy", np.stack([good, bad]))
    spec = parse_spec({"scenario": {"dims": [2, 2, 2, 2]},
                       "family": {"kind": "files", "paths": [str(tmp_path / "ops.npy")]},
                       "run": {"cluster": "serial", "progress": False}})
    run_sweep(spec, str(tmp_path / "f.h5"))
    _, samples, _ = read_results(tmp_path / "f.h5")
    samples = samples[np.argsort(samples["index"])]
    assert samples["status"].tolist() == [b"ok", b"invalid"]
    assert samples["verdict"][0] == b"separable" and b"trace" in samples["message"][1]
