"""``cluster: jobqueue, system: slurm`` against a real one-node SLURM (tests/sweep/slurm.py):
results equal to serial bit for bit, cluster settings read back from a SLURM worker, TLS,
refused jobs, a cancelled worker job, and workers replaced before their walltime."""

import os
import subprocess
import sys
import threading
import time
from pathlib import Path

import numpy as np
import pytest
import yaml

from sweep.execution.cluster_jobqueue import worker_lifetime
from sweep.execution.clusters import CLUSTER_CONFIG, open_client
from sweep.errors import UserError
from sweep.execution.execute import run_sweep
from sweep.spec.model import parse_spec
from sweep.spec.run import RunSpec
from sweep.storage.results import read_results
from sweep.storage.writer import ResultFile
from tests.sweep.slurm import slurm  # noqa: F401 - the module's SLURM fixture
from tests.sweep.execution.test_security import rejects_strangers

REPO = Path(__file__).resolve().parents[3]
pytestmark = pytest.mark.cluster
OCB = {"family": {"kind": "named", "name": "ocb"},
       "grid": [{"param": "weight", "values": [0.5, 0.6, 0.7, 0.8, 1.0]}],
       "compute": {"robustness": ["random", "generalized"]}, "run": {"progress": False}}
# 2-qubit valid_direction samples: ~0.3-1 s each with certification on this machine
ENSEMBLE = {"scenario": {"dims": [2, 2, 2, 2]},
            "family": {"kind": "ensemble", "measure": "valid_direction"},
            "grid": [{"param": "u", "values": [0.9, 1.0]}],
            "compute": {"samples": 12, "seed": 5}, "run": {"progress": False}}


@pytest.fixture
def on_slurm(slurm, tmp_path, monkeypatch):  # noqa: F811 - pytest fixture injection
    """Run from tmp_path (job logs, certificates) with the test SLURM's configuration; the
    jobs inherit the environment, so their workers can import this module's functions."""
    monkeypatch.chdir(tmp_path)
    monkeypatch.setenv("SLURM_CONF", slurm.env["SLURM_CONF"])
    monkeypatch.setenv("PYTHONPATH", str(REPO))
    yield slurm
    slurm.cancel_all()  # nothing of this test left in the queue


def _run(jobs=1, walltime="00:10:00", **extra):
    jq = {"system": "slurm", "cores": 1, "memory": "1GB", "walltime": walltime, "jobs": jobs}
    return RunSpec.model_validate({"cluster": "jobqueue", "progress": False,
                                   "jobqueue": {**jq, **extra.pop("jobqueue", {})}, **extra})


def _sorted(path):
    _, s, _ = read_results(path)
    return s[np.argsort(s["index"])]


def _same_results(a, b):
    for f in ("index", "seed", "verdict", "status", "certified"):
        assert np.array_equal(a[f], b[f]), f
    for f in ("aux", "r_random", "r_random_lo", "r_random_hi", "r_generalized", "cert_margin"):
        assert np.array_equal(a[f], b[f], equal_nan=True), f


def _readback(dask_worker):
    """On a worker: what it was given (cluster settings, BLAS threads, warm-up, job)."""
    import dask

    from sweep.planning.task import plan_from_json
    return {"config": {k: dask.config.get(k) for k in CLUSTER_CONFIG},
            "blas": {v: os.environ.get(v) for v in ("OMP_NUM_THREADS", "MKL_NUM_THREADS",
                                                    "OPENBLAS_NUM_THREADS")},
            "warm": ("orderless-warm-up" in dask_worker.plugins
                     and plan_from_json.cache_info().currsize >= 1),
            "job": os.environ.get("SLURM_JOB_ID", ""), "nthreads": dask_worker.state.nthreads}


def test_worker_reads_back_cluster_settings_and_refuses_strangers(on_slurm):
    """A SLURM worker has CLUSTER_CONFIG (not dask's defaults: profiler off, 1 s ticks), one
    BLAS thread and one dask thread, and was warmed up when it joined; the scheduler is TLS
    (the default for jobqueue), the job script holds no key, and clients without the run's
    credentials are refused."""
    spec = parse_spec(OCB)
    with open_client(_run(), spec.model_dump_json()) as client:
        seen = list(client.run(_readback).values())
        script = client.cluster.job_script()
        assert "--tls-key" in script and "PRIVATE KEY" not in script  # a 0600 file instead
        assert client.scheduler.address.startswith("tls://127.0.0.1:")
        rejects_strangers(client.scheduler.address)
    assert len(seen) == 1 and seen[0]["job"].isdigit()  # a worker inside a SLURM job
    w = seen[0]
    for key, value in CLUSTER_CONFIG.items():
        if isinstance(value, dict):
            assert value.items() <= w["config"][key].items(), key
        else:
            assert w["config"][key] == value, key
    assert set(w["blas"].values()) == {"1"} and w["nthreads"] == 1 and w["warm"]


def test_sweep_matches_serial_bit_for_bit(on_slurm, tmp_path):
    spec = parse_spec(OCB)
    out = run_sweep(spec, str(tmp_path / "q.h5"), _run(samples_per_task=2))
    run_sweep(spec, str(tmp_path / "s.h5"), RunSpec(cluster="serial", progress=False))
    q, s = _sorted(tmp_path / "q.h5"), _sorted(tmp_path / "s.h5")
    _same_results(q, s)
    assert out.computed == 5 and set(q["worker"]) == {b"SLURMCluster-0"}
    runs = yaml.safe_load(read_results(tmp_path / "q.h5")[0]["runs"])
    assert runs[-1]["cluster"] == "jobqueue" and runs[-1]["startup_s"] > 0


def test_refused_job_ends_the_run_with_sbatchs_message(on_slurm, tmp_path, write_spec):
    """An impossible partition: `orderless run` exits 2 within 60 s with one line quoting
    sbatch; an impossible memory request likewise (in-process)."""
    profiles = tmp_path / "p.yaml"
    profiles.write_text(yaml.safe_dump({"profiles": {"bad": {
        "cluster": "jobqueue", "jobqueue": {"system": "slurm", "queue": "normal"}}}}))
    proc = subprocess.run([sys.executable, "-m", "sweep.cli", "run", write_spec(OCB), "-o",
                           str(tmp_path / "r.h5"), "--profiles", str(profiles), "--profile",
                           "bad"], capture_output=True, text=True, timeout=60,
                          env={**os.environ, "SLURM_CONF": on_slurm.env["SLURM_CONF"]})
    assert proc.returncode == 2 and proc.stderr.count("\n") == 1, proc.stderr
    assert "refused the job: sbatch: error: invalid partition specified: normal" in proc.stderr
    with pytest.raises(UserError, match="refused the job: sbatch: error: Memory specification"):
        run_sweep(parse_spec(OCB), str(tmp_path / "m.h5"),
                  _run(jobqueue={"memory": "100TB"}))
    assert not on_slurm.jobs()


def test_cancelled_worker_job_loses_and_repeats_nothing(on_slurm, tmp_path, monkeypatch):
    """scancel of one of two worker jobs after the first results: the sweep completes with
    every sample stored exactly once."""
    spec = parse_spec(ENSEMBLE)
    cancelled, after = [], []
    original = ResultFile.append

    def append_then_cancel(self, rows):
        n = original(self, rows)
        if cancelled:
            after.append(n)
        else:
            running = on_slurm.run("squeue", "-h", "-t", "R", "-o", "%i").stdout.split()
            on_slurm.run("scancel", running[0])
            cancelled.append(running[0])
        return n

    monkeypatch.setattr(ResultFile, "append", append_then_cancel)
    out = run_sweep(spec, str(tmp_path / "c.h5"), _run(jobs=2, samples_per_task=1))
    s = _sorted(tmp_path / "c.h5")
    assert s["index"].tolist() == list(range(24)) and out.computed == 24
    assert all(st == b"ok" for st in s["status"]) and sum(after) > 0
    assert on_slurm.job_state(cancelled[0]) == "CANCELLED"


def test_sweep_longer_than_the_walltime_completes_on_replaced_workers(on_slurm, tmp_path):
    """One job of 10 s walltime at a time: each worker leaves 2.5 s to 1.25 s before it (its
    lifetime) and the adaptive cluster submits a new job.  The first worker starts before the
    compute phase and lives at most 8.75 s, so a compute phase longer than that was finished
    by a replacement (300 samples: 22 s of solves per 200 on this 2-core machine while other
    work loaded it, so well above 8.75 s when idle): every sample once, on more jobs than the
    cluster keeps at a time, none killed at its walltime."""
    spec = parse_spec({**ENSEMBLE, "compute": {**ENSEMBLE["compute"], "samples": 150,
                                               "robustness": ["random", "generalized"]}})
    seen, stop = set(), threading.Event()

    def watch():
        while not stop.is_set():
            seen.update(on_slurm.jobs())
            time.sleep(0.5)

    watcher = threading.Thread(target=watch)
    watcher.start()
    try:
        out = run_sweep(spec, str(tmp_path / "w.h5"),
                        _run(jobs=1, walltime="00:00:10", samples_per_task=4))
    finally:
        stop.set()
        watcher.join()
    attrs, s, _ = read_results(tmp_path / "w.h5")
    assert sorted(s["index"].tolist()) == list(range(300)) and out.computed == 300
    run = yaml.safe_load(attrs["runs"])[-1]
    assert run["compute_s"] > sum(worker_lifetime("00:00:10")), run  # outlived a worker
    assert len(seen) >= 2, seen
    on_slurm.wait_empty()
    states = {j: on_slurm.job_state(j) for j in seen}
    assert set(states.values()) <= {"COMPLETED", "CANCELLED"}, states
