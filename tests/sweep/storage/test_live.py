"""Watching a running sweep: summary, plot, verify, status and snapshot on a results file
while another process appends to it (before issue 12: "unable to lock file, errno 11")."""

import json
import subprocess
import sys
import time

import h5py
import numpy as np

from sweep.cli.main import main
from sweep.cli.verify import verify_file
from sweep.storage.live import lock_path, writer_alive
from sweep.storage.progress import read_progress
from sweep.storage.results import read_results
from sweep.storage.status import run_status

SPEC = {"scenario": {"dims": [2, 2, 2, 2]},
        "family": {"kind": "ensemble", "measure": "valid_direction"},
        "grid": [{"param": "u", "values": [0.8, 1.0]}],
        "compute": {"samples": 60, "seed": 11, "store_operators": True},
        "run": {"cluster": "serial", "samples_per_task": 1}}


def test_readers_while_a_sweep_appends(write_spec, tmp_path, capsys):
    """Every read sees a consistent file: committed rows only, each sample once, counts
    that never go back; summary, plot and verify say the sweep is still running; a snapshot
    is a standalone file plain h5py opens; status reports the running state and rate."""
    out = tmp_path / "live.h5"
    writer = subprocess.Popen([sys.executable, "-m", "sweep.cli", "run", write_spec(SPEC),
                               "-o", str(out), "--no-progress"], stdout=subprocess.DEVNULL,
                              stderr=subprocess.PIPE)
    try:
        deadline = time.monotonic() + 180
        while (read_progress(out) or {}).get("computed", 0) < 5:
            assert writer.poll() is None and time.monotonic() < deadline
            time.sleep(0.05)
        seen, live_reads, checks = -1, 0, set()
        while writer.poll() is None:
            attrs, rows, _ = read_results(out)
            assert len(rows) >= seen and len(np.unique(rows["index"])) == len(rows)
            seen = len(rows)
            if not attrs["live"]:
                continue  # the writer finished between the two looks
            live_reads += 1
            step = live_reads % 5
            if step == 0 and main(["summary", str(out), "--json"]) == 0:
                summ = json.loads(capsys.readouterr().out)
                assert summ["live"]
                if summ["state"] == "running":  # else the writer recorded its end meanwhile
                    assert not summ["complete"]
                    checks.add("summary")
                else:
                    assert summ["state"] == "complete" and summ["complete"]
            elif step == 1 and main(["plot", str(out), "-o", str(tmp_path / "f.png")]) == 0:
                assert "sweep still running" in capsys.readouterr().out
                checks.add("plot")
            elif step == 2:
                rep = verify_file(out)
                assert rep["live"] and rep["failures"] == [] and rep["certificates"] > 0
                checks.add("verify")
            elif step == 3:
                copy = tmp_path / "copy.h5"
                assert main(["snapshot", str(out), "-o", str(copy)]) == 0
                assert capsys.readouterr().out == f"wrote {copy}\n"
                with h5py.File(copy, "r") as f:  # plain h5py, HDF5 locking on
                    n = int(f.attrs["committed"])
                    assert f["samples"].shape[0] == n == f["operators"].shape[0] >= 5
                checks.add("snapshot")
            elif step == 4:
                st = run_status(out)
                if st["state"] == "running":
                    assert st["alive"] and st["progress"]["phase"] == "solving"
                    checks.add("status")
        capsys.readouterr()
        assert writer.wait() == 0, writer.stderr.read().decode()
    finally:
        if writer.poll() is None:
            writer.kill()
    assert checks == {"summary", "plot", "verify", "snapshot", "status"}, (checks, live_reads)
    attrs, rows, _ = read_results(out)
    assert not attrs["live"] and sorted(rows["index"]) == list(range(120))
    assert not lock_path(out).exists() and not writer_alive(out)
    assert main(["summary", str(out)]) == 0
    assert "still running" not in capsys.readouterr().out
    prog = read_progress(out)
    assert prog["state"] == "complete" and prog["computed"] == prog["to_compute"] == 120


def test_lock_protocol(tmp_path, monkeypatch):
    """The writer's lock file: liveness seen by readers, a second writer refused, a reader
    that cannot get a consistent view within its patience told so in one line, and the lock
    file gone once the writer closes (open-file-description locks: also within one
    process)."""
    import pytest

    from sweep.storage import live
    from sweep.errors import UserError
    out = tmp_path / "r.h5"
    with h5py.File(out, "w") as f:
        f.attrs["format"] = "orderless-sweep"
    lock = live.WriterLock(out)
    lock.acquire_alive()
    assert writer_alive(out) and lock_path(out).exists()
    with pytest.raises(UserError, match="being written by another sweep"):
        live.WriterLock(out).acquire_alive()
    with live.reading(out) as f:  # between writes: readable, without HDF5's own lock
        assert f.attrs["format"] == "orderless-sweep"
    monkeypatch.setattr(live, "READER_PATIENCE", 0.3)
    with lock.changing():
        with pytest.raises(UserError, match="held its lock for 0 s"):
            with live.reading(out):
                pass
    lock.release()
    assert not writer_alive(out) and not lock_path(out).exists()
