"""Remote sweeps over a real sshd on loopback: submit, status, fetch, cancel, resume.

The remote is this machine reached through ssh with an ssh config alias; its "remote"
orderless is the one under test (the console script beside this interpreter).  Paths on both
sides contain spaces and shell metacharacters.  Every process started is stopped by its PID.
"""

from __future__ import annotations

import json
import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import pytest
import yaml

from sweep.storage.results import read_results
from tests.sweep.sshd_server import ALIAS

ORDERLESS = str(Path(sys.executable).parent / "orderless")
NASTY = "a dir; $(touch pwned) 'q'"



@pytest.fixture
def laptop(sshd, tmp_path, monkeypatch):
    """A 'laptop' folder with a profile file naming the remote, and its own registry."""
    home = tmp_path / "laptop"
    home.mkdir()
    workdir = tmp_path / "remote side" / NASTY
    profiles = {"remotes": {"ws": {
        "ssh": ALIAS, "ssh_options": sshd.ssh_options, "workdir": str(workdir),
        "command": ORDERLESS, "start": "background", "cluster": "serial",
        "setup": [f"export DASK_CONFIG={tmp_path / 'dask'} MPLBACKEND=Agg"]}}}
    (home / "profiles.yaml").write_text(yaml.safe_dump(profiles))
    env = {**os.environ, "ORDERLESS_STATE_DIR": str(home / "state"),
           "ORDERLESS_PROFILES": str(home / "profiles.yaml")}
    return home, workdir, env


def orderless(env, *args, check=True, cwd=None):
    run = subprocess.run([ORDERLESS, *args], env=env, capture_output=True, text=True,
                         cwd=cwd, timeout=300)
    if check and run.returncode != 0:
        raise AssertionError(f"orderless {args} exit {run.returncode}: {run.stderr}")
    return run


def ocb_files_spec(folder: Path, n: int = 12) -> Path:
    """A files family: OCB mixed with noise at n weights (R_r = max(0, sqrt2 p - 1),
    workers/THEORY.md §5), stored beside a spec whose name has shell metacharacters."""
    from workers.operators.families import ocb_process
    W = ocb_process().matrix
    ops = np.stack([p * W + (1 - p) * np.eye(16) / 4 for p in np.linspace(0.5, 1, n)])
    (folder / "data dir").mkdir(parents=True)
    np.save(folder / "data dir" / "ops $1.npy", ops)
    spec = folder / "my spec $(x).yaml"
    spec.write_text("scenario: {dims: [2, 2, 2, 2]}\n"
                    "family: {kind: files, paths: ['data dir/ops $1.npy']}\n"
                    "compute: {robustness: [random], eps: 1.0e-8}\n")
    return spec


def wait_until_stopped(env, sweep_id, timeout=120):
    deadline = time.monotonic() + timeout
    while time.monotonic() < deadline:
        st = json.loads(orderless(env, "status", sweep_id, "--json").stdout)
        if not st["driver"]["running"] and (st["status"] or {}).get("state") != "running":
            return st
        time.sleep(0.5)
    raise AssertionError(f"sweep {sweep_id} still running after {timeout} s")


def test_submit_status_fetch_matches_a_local_serial_run(laptop, tmp_path):
    home, workdir, env = laptop
    spec = ocb_files_spec(tmp_path / "local side")
    out = orderless(env, "submit", str(spec), "--remote", "ws")
    sweep_id = out.stdout.strip().splitlines()[-1]
    assert not list(tmp_path.rglob("pwned"))
    wait_until_stopped(env, sweep_id)
    fetched = home / "fetched.h5"
    orderless(env, "fetch", sweep_id, "-o", str(fetched))
    orderless(env, "run", str(spec), "-o", str(tmp_path / "local.h5"), "--cluster", "serial")
    _, got, _ = read_results(fetched)
    _, want, _ = read_results(tmp_path / "local.h5")
    got, want = got[np.argsort(got["index"])], want[np.argsort(want["index"])]
    assert len(got) == 12
    for name in ("index", "verdict", "r_random", "certified"):
        assert np.array_equal(got[name], want[name]), name
    listing = orderless(env, "status").stdout
    assert sweep_id in listing
