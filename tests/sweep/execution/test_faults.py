"""Faults of the environment, provoked for real: each ends in one line naming the problem and
what to do, a non-zero exit, the data kept and nothing left behind (issue 12, common
practice for command-line tools)."""

import json
import os
import shutil
import signal
import subprocess
import sys
import time

import h5py
import numpy as np
import pytest

from sweep.cli.main import main
from sweep.storage.progress import read_progress
from tests.sweep.conftest import cli, ocb_grid

OCB_DISK = {"family": {"kind": "named", "name": "ocb"},
            "grid": [{"param": "weight", "start": 0.5, "stop": 1.0, "num": 60}],
            "compute": {"store_witnesses": True, "store_operators": True},
            "run": {"cluster": "serial", "samples_per_task": 2, "progress": False}}


def _leftovers(folder, keep=("o.h5", "o.h5.progress.json")):
    return sorted(p.name for p in folder.iterdir() if p.name not in keep)


def _runs(path):
    with h5py.File(path, "r") as f:
        return json.loads(f.attrs["runs"]), int(f.attrs["committed"]), f["samples"][()]


def test_disk_full_stops_cleanly_and_resumes_elsewhere(tmpfs, write_spec, tmp_path):
    """A 1.5 MB file system fills up mid-sweep: HDF5 would crash the process on the failed
    write (exit 139 before issue 12); the free space is checked before every write, so the
    run stops with one line, exit 3, the rows stored so far readable, no temporary files, and
    the copied file resumes to completion with those rows unchanged."""
    disk = tmpfs(1500)
    spec = write_spec(OCB_DISK)
    code, out, err = cli("run", spec, "-o", disk / "o.h5")
    assert code == 3, err
    assert len(err.strip().splitlines()) == 1, err
    assert "error: disk full:" in err and "rerun the same command to resume" in err
    runs, committed, rows = _runs(disk / "o.h5")
    assert 0 < committed < 60 and len(rows) == committed
    assert runs[-1]["state"] == "failed" and "disk full" in runs[-1]["error"]
    assert read_progress(disk / "o.h5")["state"] == "failed"
    assert _leftovers(disk) == []
    moved = tmp_path / "o.h5"
    shutil.copyfile(disk / "o.h5", moved)
    code, out, err = cli("run", spec, "-o", moved)
    assert code == 0, err
    _, total, after = _runs(moved)
    assert total == 60 and after[:committed].tobytes() == rows.tobytes()


def test_disk_too_small_to_start(tmpfs, write_spec):
    """Not even room for a new results file: refused before anything is written."""
    disk = tmpfs(200)
    code, out, err = cli("run", write_spec(OCB_DISK), "-o", disk / "o.h5")
    assert code == 3 and len(err.strip().splitlines()) == 1, err
    assert "disk full" in err and "nothing was written" in err
    assert list(disk.iterdir()) == []


def test_read_only_folder(tmpfs, write_spec):
    """A results file on a file system remounted read-only, and a new file there: one line
    each, exit 3; the existing file is intact and still summarised."""
    disk = tmpfs(4000)
    spec = write_spec(ocb_grid([0.6, 0.9]))
    assert cli("run", spec, "-o", disk / "o.h5")[0] == 0
    before = (disk / "o.h5").read_bytes()
    r = subprocess.run(["mount", "-o", "remount,ro", str(disk)], capture_output=True, text=True)
    assert r.returncode == 0, r.stderr
    for target, needle in ((disk / "o.h5", "the results in 'o.h5' are intact"),
                           (disk / "new.h5", "choose a writable -o path"),
                           (disk / "sub" / "new.h5", "choose a writable -o path")):
        code, out, err = cli("run", spec, "-o", target)
        assert code == 3 and len(err.strip().splitlines()) == 1, err
        assert "is not writable (Read-only file system)" in err and needle in err
    assert (disk / "o.h5").read_bytes() == before
    assert sorted(p.name for p in disk.iterdir()) == ["o.h5", "o.h5.progress.json"]
    code, out, _ = cli("summary", disk / "o.h5")
    assert code == 0 and "samples stored: 2/2" in out


def test_files_family_errors_leave_nothing(tmp_path, write_spec, capsys):
    """Every files-family error (missing file, wrong shape, bad dataset) is one line, exit 2,
    and leaves no OUT.h5.creating, no results file and no progress file."""
    np.save(tmp_path / "w8.npy", np.eye(8))
    with h5py.File(tmp_path / "ops.h5", "w") as f:
        f["W"] = np.eye(16)[None] / 4
    base = {"scenario": {"dims": [2, 2, 2, 2]}, "run": {"cluster": "serial"}}
    for family, needle in (({"paths": ["absent.npy"]}, "'absent.npy' does not exist"),
                           ({"paths": ["w8.npy"]}, "expected (16, 16)"),
                           ({"paths": ["ops.h5"], "dataset": "V"}, "family.dataset='V'")):
        spec = write_spec({**base, "family": {"kind": "files", **family}})
        assert main(["run", spec, "-o", str(tmp_path / "out" / "o.h5")]) == 2
        err = capsys.readouterr().err.strip()
        assert len(err.splitlines()) == 1 and needle in err, err
        assert not (tmp_path / "out").exists()
    assert sorted(p.name for p in tmp_path.iterdir()) == ["ops.h5", "spec.yaml", "w8.npy"]


def test_cluster_that_fails_to_start_leaves_no_file(tmp_path, write_spec, monkeypatch, capsys):
    """A UserError raised while the cluster starts (here: the scheduler address refuses
    connections) reaches the user as one line, and no results or progress file is left."""
    import socket
    with socket.socket() as s:  # a port nobody listens on
        s.bind(("127.0.0.1", 0))
        port = s.getsockname()[1]
    from sweep.execution import execute
    monkeypatch.setattr(execute, "open_client", _fast_refusal(execute.open_client))
    spec = write_spec(ocb_grid([0.6]))
    out = tmp_path / "new" / "o.h5"
    assert main(["run", spec, "-o", str(out), "--scheduler", f"tcp://127.0.0.1:{port}",
                 "--no-progress"]) == 2
    err = capsys.readouterr().err.strip()
    assert len(err.splitlines()) == 1 and "cannot reach the scheduler" in err, err
    assert not (tmp_path / "new").exists()


def _fast_refusal(open_client):
    """open_client with a 1 s connection timeout (the real one waits 10 s)."""
    import dask

    def wrapped(run, *args):
        with dask.config.set({"distributed.comm.timeouts.connect": "1s"}):
            return open_client(run, *args)
    return wrapped


def _progress_of(proc, out, n):
    """Whether the progress file is this process's and counts ``n`` samples computed."""
    prog = read_progress(out) or {}
    return prog.get("pid") == proc.pid and prog.get("computed", 0) >= n


def _started(spec, out, n, *extra, **popen):
    """Start ``orderless run`` and return once its progress file counts ``n`` computed."""
    proc = subprocess.Popen([sys.executable, "-m", "sweep.cli", "run", spec, "-o", out,
                             "--no-progress", *extra], stdout=subprocess.PIPE,
                            stderr=subprocess.PIPE, **popen)
    deadline = time.monotonic() + 180
    while not _progress_of(proc, out, n):
        assert proc.poll() is None, proc.communicate()[1].decode()
        assert time.monotonic() < deadline, "no progress within 180 s"
        time.sleep(0.05)
    return proc


def test_sigterm_records_the_run_state(write_spec, tmp_path):
    """SIGTERM (what a batch queue sends at its time limit): exit 143, one line, the run
    recorded as terminated in the file and in the progress file, the rows kept."""
    spec = write_spec({"scenario": {"dims": [2, 2, 2, 2]},
                       "family": {"kind": "ensemble", "measure": "valid_direction"},
                       "compute": {"samples": 400, "seed": 3},
                       "run": {"cluster": "serial", "samples_per_task": 1}})
    out = tmp_path / "t.h5"
    proc = _started(spec, out, 5)
    proc.send_signal(signal.SIGTERM)
    _, err = proc.communicate(timeout=60)
    err = err.decode()
    assert proc.returncode == 143 and len(err.strip().splitlines()) == 1, err
    assert "stopped by SIGTERM" in err and "rerun the same command to resume" in err
    runs, committed, _ = _runs(out)
    assert runs[-1]["state"] == "terminated" and runs[-1]["computed"] == committed >= 5
    assert read_progress(out)["state"] == "terminated"
    assert _leftovers(tmp_path, ("t.h5", "t.h5.progress.json", "spec.yaml")) == []


@pytest.mark.cluster
def test_ctrl_c_on_local_cluster_prints_one_line(write_spec, tmp_path):
    """Ctrl-C in a terminal goes to the whole process group (driver and local workers): the
    workers ignore it, so the driver's one line is all that is printed (before issue 12:
    ~140 lines of worker tracebacks); exit 130, state interrupted, rows kept."""
    spec = write_spec({"scenario": {"dims": [2, 2, 2, 2, 2, 2]},
                       "family": {"kind": "ensemble", "measure": "valid_direction"},
                       "compute": {"samples": 40, "seed": 3},
                       "run": {"samples_per_task": 1, "workers": 2}})
    out = tmp_path / "c.h5"
    # a dashboard port already taken on a shared machine is a UserWarning of dask's, not ours
    env = {**os.environ, "PYTHONWARNINGS": "ignore::UserWarning"}
    proc = _started(spec, out, 2, start_new_session=True, env=env)
    os.killpg(proc.pid, signal.SIGINT)
    _, err = proc.communicate(timeout=120)
    err = err.decode()
    assert proc.returncode == 130, err
    assert "Traceback" not in err and "KeyboardInterrupt" not in err, err
    assert len(err.strip().splitlines()) == 1, err
    assert err.startswith("orderless run: interrupted; ") and "rerun the same command" in err
    runs, committed, _ = _runs(out)
    assert runs[-1]["state"] == "interrupted" and committed >= 2


@pytest.mark.cluster
def test_workers_dying_then_scheduler_dying(write_spec, tmp_path):
    """An address cluster (scheduler allowing no task failure, one worker with a nanny).
    First the worker process is killed while it runs a task, as the OOM killer would: dask
    gives up on the task (KilledWorker) and the run ends with one line, exit 3.  Then the
    rerun resumes and the scheduler is killed after some results: one line naming the lost
    scheduler, exit 3 (before issue 12: a 58-line FutureCancelledError traceback).  The
    rows stored so far are kept both times."""
    import psutil

    from tests.sweep.execution.test_cluster import _free_port
    port = _free_port()
    addr = f"tcp://127.0.0.1:{port}"
    env = {**os.environ, "DASK_CONFIG": str(tmp_path / "dask"),
           "DASK_DISTRIBUTED__SCHEDULER__ALLOWED_FAILURES": "0"}
    sched = subprocess.Popen([sys.executable, "-m", "distributed.cli.dask_scheduler", "--host",
                              "127.0.0.1", "--port", str(port), "--dashboard-address", ":0",
                              "--no-show"], env=env, stdout=subprocess.DEVNULL,
                             stderr=subprocess.DEVNULL)
    nanny = subprocess.Popen([sys.executable, "-m", "distributed.cli.dask_worker", addr,
                              "--nthreads", "1", "--no-dashboard"], env=env,
                             stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
    try:
        spec = write_spec({"scenario": {"dims": [2, 2, 2, 2]},
                           "family": {"kind": "ensemble", "measure": "valid_direction"},
                           "compute": {"samples": 3000, "seed": 3},
                           "run": {"samples_per_task": 1}})
        out = tmp_path / "s.h5"
        from distributed import Client
        with Client(addr, timeout="30s") as c:
            c.wait_for_workers(1, timeout=60)
        # the workers' memory is known once connected: four qutrit parties do not fit
        huge = write_spec({"scenario": {"dims": [3] * 8},
                           "family": {"kind": "ensemble", "measure": "valid_direction"}},
                          "huge.yaml")
        code, _, err = cli("run", huge, "-o", tmp_path / "q.h5", "--scheduler", addr,
                           "--no-progress", env=env)
        assert code == 2 and "a worker has here (1 worker)" in err, err
        assert not (tmp_path / "q.h5").exists()
        proc = _started(spec, out, 2, "--scheduler", addr, env=env)
        for child in psutil.Process(nanny.pid).children(recursive=True):
            child.kill()  # the worker process; the nanny starts a new one
        _, err = proc.communicate(timeout=120)
        err = err.decode()
        assert proc.returncode == 3 and len(err.strip().splitlines()) == 1, err
        assert "workers kept dying while running a task" in err
        runs, first, _ = _runs(out)
        assert runs[-1]["state"] == "failed" and first >= 2
        proc = _started(spec, out, 2, "--scheduler", addr, env=env)
        sched.kill()
        _, err = proc.communicate(timeout=120)
        err = err.decode()
        assert proc.returncode == 3 and len(err.strip().splitlines()) == 1, err
        assert f"lost the dask scheduler at {addr} (" in err
        runs, committed, _ = _runs(out)
        assert [r["state"] for r in runs] == ["failed", "failed"] and committed >= first + 2
    finally:
        for p in (nanny, sched):
            p.kill()
            p.wait(timeout=30)


def test_broken_pipe_is_quiet(tmp_path, write_spec):
    """`orderless summary ... | head` with head gone before the output is written: no
    BrokenPipeError traceback, exit 141 (as if killed by SIGPIPE)."""
    out = tmp_path / "o.h5"
    assert main(["run", write_spec(ocb_grid([0.6, 0.9])), "-o", str(out), "--json"]) == 0
    np.save(tmp_path / "w.npy", np.eye(16) / 4)
    for argv in (["summary", out], ["summary", out, "--json"],
                 ["check", tmp_path / "w.npy", "--dims", "2,2,2,2"]):
        proc = subprocess.Popen([sys.executable, "-m", "sweep.cli", *map(str, argv)],
                                stdout=subprocess.PIPE, stderr=subprocess.PIPE)
        proc.stdout.close()  # the reader is gone before anything is written
        err = proc.stderr.read().decode()
        assert proc.wait(timeout=120) == 141, (argv, err)
        assert err == "", (argv, err)


def test_huge_sample_count_refused_up_front(write_spec, tmp_path):
    """samples: 1e9 used to build a 1e9-element list (MemoryError at 5.5 GB): the planning
    is lazy and the sample table alone is compared with the free disk before anything."""
    spec = write_spec({"scenario": {"dims": [2, 2, 2, 2]},
                       "family": {"kind": "ensemble", "measure": "valid_direction"},
                       "compute": {"samples": 10 ** 9}})
    code, out, err = cli("run", spec, "-o", tmp_path / "b.h5", timeout=120)
    assert code == 2 and len(err.strip().splitlines()) == 1, err
    assert "1000000000 samples need at least 514.0 GB for the sample table alone" in err
    assert sorted(p.name for p in tmp_path.iterdir()) == ["spec.yaml"]


def test_problem_too_large_for_the_workers(write_spec, tmp_path):
    """Four qutrit parties (D = 6561) started silently and grew to GBs: the estimate per
    problem (~95 GB per worker) is refused against the local workers' memory."""
    spec = write_spec({"scenario": {"dims": [3] * 8},
                       "family": {"kind": "ensemble", "measure": "valid_direction"},
                       "compute": {"samples": 2}, "run": {"workers": 2}})
    code, out, err = cli("run", spec, "-o", tmp_path / "q.h5", timeout=120)
    assert code == 2 and len(err.strip().splitlines()) == 1, err
    assert "D = 6561" in err and "per worker" in err and "a worker has here (2 workers)" in err
    assert sorted(p.name for p in tmp_path.iterdir()) == ["spec.yaml"]


def test_hours_of_work_are_announced(write_spec, tmp_path, capsys):
    """Four qubit parties with ADMM take minutes per sample (bench/README.md): 40 samples on
    2 workers are announced as hours before anything starts (dry run)."""
    spec = write_spec({"scenario": {"dims": [2] * 8},
                       "family": {"kind": "ensemble", "measure": "valid_direction"},
                       "compute": {"samples": 40}, "run": {"workers": 2}})
    assert main(["run", spec, "-o", str(tmp_path / "f.h5"), "--dry-run"]) == 0
    out = capsys.readouterr().out
    assert "40 to compute" in out and "ADMM, blocks 128 x 24" in out
    assert "warning: estimated ~" in out and " h for 40 samples on 2 workers" in out
    assert not (tmp_path / "f.h5").exists()

