"""From a laptop to a batch cluster, for real: a sweep submitted over SSH (a real sshd on
loopback, reached through an ssh config alias) runs as one SLURM batch job in allocation
mode (a one-node SLURM started by tests/sweep/slurm.py).  The laptop's side goes away while
it runs (its SSH server is stopped and started again), a partial fetch mid-run is readable
and verifies, ``cancel`` stops the job, ``submit --resume`` continues the same file, and the
final fetch equals a local serial run of the same spec, sample by sample."""

from __future__ import annotations

import json
import os
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import pytest
import yaml

from sweep.storage.results import read_results
from tests.sweep.slurm import slurm  # noqa: F401 - the module's SLURM fixture
from tests.sweep.sshd_server import ALIAS, restart_sshd, start_sshd, stop_sshd

pytestmark = pytest.mark.cluster
ORDERLESS = str(Path(sys.executable).parent / "orderless")
SPEC = """\
# bipartite qubits, 36 samples with the OCB game's see-saw value (slow enough to watch)
scenario: {dims: [2, 2, 2, 2]}
family: {kind: ensemble, measure: valid_direction}
grid: [{param: u, values: [0.8, 1.0]}]
compute: {samples: 18, seed: 14, robustness: [random],
          game: {name: ocb_guess, starts: 1, max_iter: 10}}
run: {samples_per_task: 1}
"""


@pytest.fixture(scope="module")
def own_sshd(tmp_path_factory):
    """An sshd of this module's own, so that it can be stopped and started mid-sweep."""
    holder = {"server": start_sshd(tmp_path_factory.mktemp("sshd-own"))}
    yield holder
    stop_sshd(holder["server"])


def _orderless(env, *args, check=True):
    run = subprocess.run([ORDERLESS, *map(str, args)], env=env, capture_output=True,
                         text=True, timeout=300)
    if check and run.returncode != 0:
        raise AssertionError(f"orderless {args}: exit {run.returncode}: {run.stderr}")
    return run


def _status(env, sweep_id) -> dict:
    return json.loads(_orderless(env, "status", sweep_id, "--json").stdout)


def _wait(env, sweep_id, done, what, timeout=240) -> dict:
    deadline = time.monotonic() + timeout
    while time.monotonic() < deadline:
        st = _status(env, sweep_id)
        if done(st):
            return st
        time.sleep(0.5)
    raise AssertionError(f"{what}: not reached in {timeout} s; last status {st}")


def _computed(st) -> int:
    return int(((st["status"] or {}).get("progress") or {}).get("computed", 0))


def _state(st) -> str:
    return (st["status"] or {}).get("state", "none")


def test_submit_watch_cancel_resume_fetch_over_ssh_on_slurm(slurm, own_sshd,  # noqa: F811
                                                             tmp_path):
    laptop, remote_dir = tmp_path / "laptop", tmp_path / "cluster side" / "sweeps $HOME; x"
    laptop.mkdir()
    spec = laptop / "my sweep (v1).yaml"
    spec.write_text(SPEC)
    server = own_sshd["server"]
    setup = [f"export SLURM_CONF={slurm.env['SLURM_CONF']}",
             f"export DASK_CONFIG={slurm.env.get('DASK_CONFIG', tmp_path / 'dask')}",
             "export MPLBACKEND=Agg"]
    profiles = {"remotes": {"hpc": {
        "ssh": ALIAS, "ssh_options": server.ssh_options, "workdir": str(remote_dir),
        "command": ORDERLESS, "setup": setup, "start": "sbatch", "cluster": "allocation",
        "sbatch": ["--ntasks=2", "--time=00:10:00"]}}}
    (laptop / "profiles.yaml").write_text(yaml.safe_dump(profiles))
    env = {k: v for k, v in os.environ.items() if k != "SLURM_CONF"}
    env.update(ORDERLESS_STATE_DIR=str(laptop / "state"),
               ORDERLESS_PROFILES=str(laptop / "profiles.yaml"), MPLBACKEND="Agg")

    sub = _orderless(env, "submit", spec, "--remote", "hpc")
    sweep_id = sub.stdout.strip().splitlines()[-1]
    reference = subprocess.Popen([ORDERLESS, "run", str(spec), "-o", str(tmp_path / "ref.h5"),
                                  "--cluster", "serial", "--no-progress"], env=env,
                                 stdout=subprocess.DEVNULL, stderr=subprocess.PIPE)
    # the laptop goes away: its SSH connection (here: the server) is gone for a while
    time.sleep(1)
    own_sshd["server"] = server = restart_sshd(server)
    st = _wait(env, sweep_id, lambda s: _state(s) == "running" and _computed(s) >= 3,
               "three samples computed while running")
    assert st["driver"]["queue_state"] == "RUNNING"

    partial = laptop / "partial.h5"
    _orderless(env, "fetch", sweep_id, "-o", partial)  # while the job runs
    _orderless(env, "cancel", sweep_id)
    _, rows, _ = read_results(partial)
    assert 3 <= len(rows) < 36
    assert _orderless(env, "verify", partial).returncode == 0
    assert "samples stored:" in _orderless(env, "summary", partial).stdout
    st = _wait(env, sweep_id, lambda s: not s["driver"]["running"], "the job stopped")
    assert _state(st) in ("terminated", "interrupted", "dead"), st
    assert st["driver"]["queue_state"] in ("CANCELLED", "COMPLETED", "FAILED"), st

    _orderless(env, "submit", "--remote", "hpc", "--resume", sweep_id)
    _wait(env, sweep_id, lambda s: _state(s) == "complete" and not s["driver"]["running"],
          "the resumed sweep complete")
    final = laptop / "final.h5"
    _orderless(env, "fetch", sweep_id, "-o", final)
    assert reference.wait(timeout=300) == 0, reference.stderr.read()

    attrs, got, _ = read_results(final)
    _, want, _ = read_results(tmp_path / "ref.h5")
    got, want = got[np.argsort(got["index"])], want[np.argsort(want["index"])]
    assert got["index"].tolist() == list(range(36))  # each sample exactly once
    for name in ("seed", "status", "verdict", "certified", "r_random", "r_random_lo",
                 "r_random_hi", "cert_margin", "game_value"):
        nan_ok = got[name].dtype.kind == "f"
        assert np.array_equal(got[name], want[name], equal_nan=nan_ok), name
    runs = json.loads(attrs["runs"])
    assert len(runs) == 2 and sum(r["computed"] for r in runs) == 36
    assert slurm.jobs() == {}


WALLTIME_SPEC = """\
# slow samples (see-saw with several starts) so that the sweep outlasts a 1-minute job
scenario: {dims: [2, 2, 2, 2]}
family: {kind: ensemble, measure: valid_direction}
compute: {samples: 120, seed: 5, robustness: [random],
          game: {name: ocb_guess, starts: 4, max_iter: 60}}
run: {samples_per_task: 1}
"""


@pytest.mark.slow
def test_job_killed_at_its_time_limit_shows_timeout_and_resumes(slurm, own_sshd,  # noqa: F811
                                                                tmp_path):
    """sbatch --time=1 (SLURM's smallest limit, one minute): the job is killed at its time
    limit (SIGTERM, then SIGKILL after KillWait); status shows TIMEOUT and the run
    terminated, nothing stored is lost, and --resume with a longer limit completes it."""
    laptop = tmp_path / "laptop"
    laptop.mkdir()
    spec = laptop / "long.yaml"
    spec.write_text(WALLTIME_SPEC)
    server = own_sshd["server"]

    def profiles(time_limit: str) -> None:
        setup = [f"export SLURM_CONF={slurm.env['SLURM_CONF']}", "export MPLBACKEND=Agg"]
        (laptop / "profiles.yaml").write_text(yaml.safe_dump({"remotes": {"hpc": {
            "ssh": ALIAS, "ssh_options": server.ssh_options, "workdir": str(tmp_path / "w"),
            "command": ORDERLESS, "setup": setup, "start": "sbatch", "cluster": "allocation",
            "sbatch": ["--ntasks=2", f"--time={time_limit}"]}}}))

    profiles("1")
    env = {k: v for k, v in os.environ.items() if k != "SLURM_CONF"}
    env.update(ORDERLESS_STATE_DIR=str(laptop / "state"),
               ORDERLESS_PROFILES=str(laptop / "profiles.yaml"), MPLBACKEND="Agg")
    sweep_id = _orderless(env, "submit", spec, "--remote", "hpc").stdout.split()[-1]
    st = _wait(env, sweep_id, lambda s: not s["driver"]["running"] and _state(s) != "running",
               "the job ended", timeout=300)
    assert st["driver"]["queue_state"] == "TIMEOUT", st
    assert _state(st) in ("terminated", "dead"), st
    first = int(st["status"]["stored"])
    assert 0 < first < 120
    profiles("00:30:00")
    _orderless(env, "submit", "--remote", "hpc", "--resume", sweep_id)
    st = _wait(env, sweep_id, lambda s: _state(s) == "complete" and not s["driver"]["running"],
               "the resumed sweep complete", timeout=900)
    final = laptop / "final.h5"
    _orderless(env, "fetch", sweep_id, "-o", final)
    attrs, rows, _ = read_results(final)
    assert sorted(rows["index"].tolist()) == list(range(120))
    runs = json.loads(attrs["runs"])
    assert [r["computed"] for r in runs][0] == first and sum(r["computed"] for r in runs) == 120
