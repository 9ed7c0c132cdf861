"""The run, summary, plot and demo commands end to end through ``sweep.cli.main.main``."""

import json

import h5py
import numpy as np
import pytest

from sweep.cli.main import main
from tests.sweep.conftest import ocb_grid


def test_run_summary_plot(write_spec, tmp_path, capsys):
    """run prints the table; summary --json gives per-point fractions; plot writes a PNG."""
    spec, out = write_spec(ocb_grid([0.6, 0.9])), str(tmp_path / "o.h5")
    assert main(["run", spec, "-o", out]) == 0
    assert "2 computed" in capsys.readouterr().out
    assert main(["summary", out, "--json"]) == 0
    summ = json.loads(capsys.readouterr().out)
    assert [p["nonseparable"] for p in summ["points"]] == [0, 1] and summ["complete"]
    fig = tmp_path / "f.png"
    assert main(["plot", out, "-o", str(fig)]) == 0
    assert fig.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    assert main(["plot", out, "-o", str(fig), "--axis", "u"]) == 2


def test_hdf5_files_family(write_spec, tmp_path, capsys):
    """Operators read from an HDF5 dataset (n, D, D): the OCB process is nonseparable, white
    noise separable (workers/THEORY.md §5)."""
    from workers.operators.families import ocb_process
    ops = np.stack([ocb_process().matrix, np.eye(16) / 4])
    with h5py.File(tmp_path / "ops.h5", "w") as f:
        f["W"] = ops
    data = {"scenario": {"dims": [2, 2, 2, 2]},
            "family": {"kind": "files", "paths": ["ops.h5"], "dataset": "W"},
            "run": {"cluster": "serial", "progress": False}}
    out = str(tmp_path / "o.h5")
    assert main(["run", write_spec(data), "-o", out, "--json"]) == 0
    with h5py.File(out, "r") as f:
        s = f["samples"][()]
    assert s["verdict"][np.argsort(s["index"])].tolist() == [b"nonseparable", b"separable"]
    data["family"]["dataset"] = "V"
    assert main(["run", write_spec(data), "-o", str(tmp_path / "p.h5")]) == 2
    assert "family.dataset='V' not found" in capsys.readouterr().err


@pytest.mark.slow
def test_demo_writes_file_and_summary(chdir_tmp, capsys):
    """`orderless demo` writes results/demo.h5 in the current directory and prints its
    summary; at u = 1 (on the PSD boundary) some samples are nonseparable."""
    assert main(["demo", "--workers", "2"]) == 0
    out = capsys.readouterr().out
    assert "samples stored: 352/352" in out
    assert (chdir_tmp / "results" / "demo.h5").is_file()
