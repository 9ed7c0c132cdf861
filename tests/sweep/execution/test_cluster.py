"""End to end on a real dask cluster: a scheduler and two workers started as separate
processes on loopback with the ``dask scheduler`` / ``dask worker`` command lines (as
dask-jobqueue tests its real-scheduler suite)."""

import os
import socket
import subprocess
import sys
from pathlib import Path

import numpy as np
import psutil
import pytest

from sweep.execution.execute import run_sweep
from sweep.spec.model import parse_spec
from sweep.spec.run import RunSpec
from sweep.storage.results import read_results
from sweep.storage.writer import ResultFile

REPO = Path(__file__).resolve().parents[3]
pytestmark = pytest.mark.cluster
SPEC = {"scenario": {"dims": [2, 2, 2, 2]},
        "family": {"kind": "ensemble", "measure": "valid_direction"},
        "grid": [{"param": "u", "values": [0.9, 1.0]}],
        "compute": {"samples": 6, "seed": 8, "robustness": ["random", "generalized"]},
        "run": {"progress": False, "samples_per_task": 4}}


def _free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


@pytest.fixture(scope="module")
def scheduler(tmp_path_factory):
    """Start ``dask scheduler`` and two ``dask worker`` processes; tear them down after."""
    env = {**os.environ, "DASK_CONFIG": str(tmp_path_factory.mktemp("dask")),
           "PYTHONPATH": str(REPO)}
    port = _free_port()
    addr = f"tcp://127.0.0.1:{port}"
    dask = [sys.executable, "-m", "distributed.cli.dask_scheduler"]
    procs = [subprocess.Popen(dask + ["--host", "127.0.0.1", "--port", str(port),
                                      "--dashboard-address", ":0", "--no-show"], env=env,
                              stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)]
    for name in ("w1", "w2"):
        procs.append(subprocess.Popen(
            [sys.executable, "-m", "distributed.cli.dask_worker", addr, "--nthreads", "1",
             "--name", name, "--no-dashboard"], env=env, cwd=REPO,
            stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL))
    from distributed import Client
    with Client(addr, timeout="30s") as c:
        c.wait_for_workers(2, timeout=60)
    yield addr, procs
    for p in procs:
        p.terminate()
    for p in procs:
        try:
            p.wait(timeout=10)
        except subprocess.TimeoutExpired:
            p.kill()


def _sorted(path):
    _, s, _ = read_results(path)
    return s[np.argsort(s["index"])]


def test_cluster_results_identical_to_local(scheduler, tmp_path):
    """The same spec on the loopback cluster and on the local default gives identical
    operators, seeds, statuses, verdicts and robustness values, bit for bit (every cold solve
    uses a fresh SCS workspace, so nothing depends on which worker or task ran a sample)."""
    addr, _ = scheduler
    spec = parse_spec(SPEC)
    run_sweep(spec, str(tmp_path / "c.h5"), RunSpec(cluster="address", address=addr,
                                                    progress=False, samples_per_task=4))
    run_sweep(spec, str(tmp_path / "l.h5"), RunSpec(cluster="local", workers=2,
                                                    progress=False, samples_per_task=3))
    c, l = _sorted(tmp_path / "c.h5"), _sorted(tmp_path / "l.h5")
    assert set(c["worker"]) == {b"w1", b"w2"}
    for f in ("index", "seed", "verdict", "status", "aux"):
        assert np.array_equal(c[f], l[f]), f
    for f in ("r_random", "r_generalized", "r_random_lo", "cert_margin"):
        assert np.array_equal(c[f], l[f], equal_nan=True), f


def test_killed_worker_still_every_sample_once(scheduler, tmp_path, monkeypatch):
    """SIGKILL one worker process right after the first results arrive: its nanny restarts
    it, dask re-runs the lost tasks, and every sample is stored exactly once
    (dask's documented behaviour for a lost worker)."""
    addr, procs = scheduler
    spec = parse_spec({**SPEC, "compute": {**SPEC["compute"], "samples": 20}})
    nanny = psutil.Process(procs[1].pid)
    killed, after_kill = [], []
    original = ResultFile.append

    def append_then_kill(self, rows):
        n = original(self, rows)
        if killed:
            after_kill.append(n)
        else:
            for child in nanny.children(recursive=True):
                child.kill()
                killed.append(child.pid)
        return n

    monkeypatch.setattr(ResultFile, "append", append_then_kill)
    out = run_sweep(spec, str(tmp_path / "k.h5"), RunSpec(cluster="address", address=addr,
                                                          progress=False, samples_per_task=2))
    assert killed, "no worker process was found to kill"
    assert sum(after_kill) > 0  # the sweep went on after the kill
    s = _sorted(tmp_path / "k.h5")
    assert s["index"].tolist() == list(range(40)) and out.computed == 40
    assert all(st == b"ok" for st in s["status"])
