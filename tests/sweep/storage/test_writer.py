"""The HDF5 results file: self-describing attributes, resume, refusal of a different spec,
and a driver killed with SIGKILL mid-sweep (measured with h5py: an unflushed HDF5 file killed
mid-write was unreadable; flushed after each chunk it was readable)."""

import json
import signal
import subprocess
import sys
import time
from pathlib import Path

import h5py
import numpy as np

from sweep.cli.main import main
from sweep.execution.execute import run_sweep
from sweep.storage.progress import read_progress
from sweep.spec.model import SCHEMA_VERSION, parse_spec
from sweep.storage.results import FORMAT
from tests.sweep.conftest import ocb_grid

REPO = Path(__file__).resolve().parents[3]


def test_file_is_self_describing(tmp_path):
    """Every provenance item the issue lists is a plain h5py attribute or dataset."""
    spec = parse_spec(ocb_grid([0.6, 0.8], store_operators=True, store_witnesses=True))
    run_sweep(spec, str(tmp_path / "a.h5"))
    with h5py.File(tmp_path / "a.h5", "r") as f:
        a = f.attrs
        assert a["format"] == FORMAT and a["schema_version"] == SCHEMA_VERSION == 4
        assert a["spec_hash"] == spec.spec_hash() and a["root_seed"] == 0
        assert "ocb" in a["spec_yaml"] and json.loads(a["versions"])["numpy"] == np.__version__
        run = json.loads(a["runs"])[0]
        assert run["state"] == "complete" and run["host"] and run["finished"]
        s = f["samples"][()]
        assert sorted(s["index"]) == [0, 1]
        assert f["grid/points"][()].tolist() == [[0.6], [0.8]]
        assert f["operators"].shape == (2, 16, 16) and f["witnesses"].shape == (2, 16, 16)
        ops = f["operators"][()][np.argsort(s["index"])]
    from workers.operators.families import ocb_process, white_noise_mixture
    p = ocb_process()
    assert np.allclose(ops[1], white_noise_mixture(p.scenario, p.matrix, 0.8))


def test_rerun_resumes_and_different_spec_is_refused(tmp_path, capsys):
    """Same spec: nothing recomputed; other spec: refused with a one-line error."""
    out = str(tmp_path / "a.h5")
    spec = parse_spec(ocb_grid([0.6, 0.7, 0.8]))
    first = run_sweep(spec, out)
    again = run_sweep(spec, out)
    assert (first.computed, again.computed, again.already_done) == (3, 0, 3)
    spec_file = tmp_path / "other.yaml"
    import yaml
    spec_file.write_text(yaml.safe_dump(ocb_grid([0.6, 0.9])))
    assert main(["run", str(spec_file), "-o", out]) == 2
    err = capsys.readouterr().err
    assert "holds a different spec" in err and len(err.strip().splitlines()) == 1


def test_partial_rows_beyond_committed_are_discarded(tmp_path):
    """Crash consistency: rows past the ``committed`` attribute (a write cut short) are
    dropped on reopen and recomputed, so no sample is stored twice or half."""
    out = tmp_path / "a.h5"
    spec = parse_spec(ocb_grid([0.6, 0.7, 0.8]))
    run_sweep(spec, str(out))
    with h5py.File(out, "r+") as f:
        f.attrs["committed"] = 1
    res = run_sweep(spec, str(out))
    assert res.already_done == 1 and res.computed == 2
    with h5py.File(out, "r") as f:
        assert sorted(f["samples"]["index"]) == [0, 1, 2]


def _spec_for_kill(write_spec):
    data = {"scenario": {"dims": [2, 2, 2, 2]},
            "family": {"kind": "ensemble", "measure": "valid_direction"},
            "compute": {"samples": 150, "seed": 3},
            "run": {"cluster": "serial", "samples_per_task": 2}}
    return write_spec(data)


def _start_and_wait(spec, out, n_done, **popen):
    """Start ``orderless run`` and return once its progress file counts ``n_done`` samples
    computed (the progress file is how a running sweep is watched)."""
    proc = subprocess.Popen([sys.executable, "-m", "sweep.cli", "run", spec, "-o", out],
                            cwd=REPO, stderr=subprocess.PIPE, stdout=subprocess.DEVNULL,
                            **popen)
    deadline = time.monotonic() + 120
    while (read_progress(out) or {}).get("pid") != proc.pid or \
            read_progress(out).get("computed", 0) < n_done:
        assert proc.poll() is None, "driver ended before it could be stopped"
        assert time.monotonic() < deadline, "no progress within 120 s"
        time.sleep(0.05)
    return proc


def test_ctrl_c_stops_cleanly_and_resumes(write_spec, tmp_path):
    """SIGINT (Ctrl-C): exit 130, the run is recorded as interrupted, the rerun completes."""
    spec, out = _spec_for_kill(write_spec), str(tmp_path / "c.h5")
    proc = _start_and_wait(spec, out, 10)
    proc.send_signal(signal.SIGINT)
    assert proc.wait(timeout=60) == 130
    with h5py.File(out, "r") as f:
        assert json.loads(f.attrs["runs"])[0]["state"] == "interrupted"
    assert main(["run", spec, "-o", out, "--no-progress"]) == 0
    with h5py.File(out, "r") as f:
        assert sorted(f["samples"]["index"]) == list(range(150))


def test_driver_killed_mid_sweep_then_resumed(write_spec, tmp_path, capsys):
    """SIGKILL the driver after some chunks were written; the file opens, the rerun computes
    only the missing samples (the rows of the first run keep their worker pid), and every
    sample is present exactly once."""
    spec, out = _spec_for_kill(write_spec), str(tmp_path / "k.h5")
    proc = _start_and_wait(spec, out, 20)
    proc.send_signal(signal.SIGKILL)
    proc.wait()
    with h5py.File(out, "r") as f:
        before = f["samples"][: int(f.attrs["committed"])]
    assert 20 <= len(before) < 150
    # before the rerun, readers show the run as dead (it still says "running" in the file)
    assert main(["status", out, "--json"]) == 0
    st = json.loads(capsys.readouterr().out)
    assert st["state"] == "dead" and not st["alive"] and st["stored"] == len(before)
    assert main(["summary", out]) == 0
    assert "the last run died without recording its end" in capsys.readouterr().out
    assert main(["run", spec, "-o", out, "--no-progress"]) == 0
    with h5py.File(out, "r") as f:
        after = f["samples"][()]
        runs = json.loads(f.attrs["runs"])
    assert sorted(after["index"]) == list(range(150))
    assert after[: len(before)].tobytes() == before.tobytes()  # bitwise: NaN fields too
    assert runs[0]["state"] == "dead" and runs[0]["computed"] == len(before)
    assert runs[1]["state"] == "complete"
    assert runs[1]["computed"] == 150 - len(before)
    pids = {w.split(b":")[-1] for w in after["worker"]}
    assert len(pids) == 2
