"""Reading results files: schema 3 files (before issue 12) are read and resumed in their own
layout; per-sample solver time and batch; the summary table's columns."""

import json
import re

import h5py
import numpy as np
import numpy.lib.recfunctions as rfn

from sweep.cli.main import main
from sweep.execution.execute import run_sweep
from sweep.storage.results import SAMPLE_DTYPE, read_results
from sweep.spec.model import parse_spec
from sweep.report.stats import format_table, summarise
from tests.sweep.conftest import ocb_grid


def _as_schema_3(path):
    """Rewrite a file in the schema-3 layout: solve_time, no solve_batch or run column."""
    with h5py.File(path, "r+") as f:
        rows = f["samples"][()]
        old = rfn.rename_fields(rfn.drop_fields(rows, ["solve_batch", "run"], usemask=False),
                                {"solve_time_share": "solve_time"})
        del f["samples"]
        f.create_dataset("samples", data=old, maxshape=(None,), chunks=(256,))
        f.attrs["schema_version"] = 3
        f.attrs["committed"] = 2


def test_schema_3_file_is_read_and_resumed(tmp_path):
    spec = parse_spec(ocb_grid([0.6, 0.7, 0.9]))
    out = tmp_path / "old.h5"
    run_sweep(spec, str(out))
    _as_schema_3(out)
    attrs, rows, _ = read_results(out)
    assert rows.dtype == SAMPLE_DTYPE and len(rows) == 2
    assert (rows["run"] == -1).all() and (rows["solve_batch"] == -1).all()
    assert np.isfinite(rows["solve_time_share"]).all()
    res = run_sweep(spec, str(out))
    assert (res.already_done, res.computed) == (2, 1)
    with h5py.File(out, "r") as f:
        assert "solve_time" in f["samples"].dtype.names and f.attrs["schema_version"] == 3
        assert np.isfinite(f["samples"]["solve_time"]).all()
    assert len(read_results(out)[1]) == 3


def test_solve_time_is_the_samples_share_of_its_batch(tmp_path):
    """Bipartite qubits go to the batched interior point: the four samples of a task share
    one solve (solve_batch 4) and its time equally; alone, a sample's time is its own."""
    data = {"scenario": {"dims": [2, 2, 2, 2]},
            "family": {"kind": "ensemble", "measure": "valid_direction"},
            "compute": {"samples": 5, "seed": 2},
            "run": {"cluster": "serial", "progress": False, "samples_per_task": 4}}
    out = tmp_path / "b.h5"
    run_sweep(parse_spec(data), str(out))
    _, rows, _ = read_results(out)
    rows = rows[np.argsort(rows["index"])]
    solved = rows["solver_status"] != b"shortcut"
    assert rows["solve_batch"][:4][solved[:4]].tolist() == [solved[:4].sum()] * solved[:4].sum()
    assert rows["solve_batch"][4] == (1 if solved[4] else 0)
    shares = rows["solve_time_share"][:4][solved[:4]]
    assert np.allclose(shares, shares[0]) and (shares > 0).all()
    assert (rows["run"] == 0).all()


def test_summary_columns_do_not_shift_and_failures_are_split(tmp_path, write_spec, capsys):
    """Each column is as wide as its widest entry (a long CI used to push the rest right),
    and invalid, failed and error samples have their own columns."""
    good, bad = np.eye(16) / 4, np.eye(16) / 2  # white noise; trace 8 (invalid)
    np.save(tmp_path / "ops.npy", np.stack([good, bad, good]))
    spec = write_spec({"scenario": {"dims": [2, 2, 2, 2]},
                       "family": {"kind": "files", "paths": ["ops.npy"]},
                       "grid": [{"param": "weight", "values": [1.0, 0.123456789]}],
                       "run": {"cluster": "serial", "progress": False}})
    out = tmp_path / "f.h5"
    assert main(["run", spec, "-o", str(out)]) == 0
    capsys.readouterr()
    table = format_table(summarise(*read_results(out)))
    lines = table.splitlines()[2:]
    assert len({len(line) for line in lines}) == 1, table
    header = re.split(r"\s{2,}", lines[0].strip())
    assert header[-6:-2] == ["undec", "invalid", "failed", "error"]
    for line in lines[1:]:
        cells = dict(zip(header, re.split(r"\s{2,}", line.strip())))
        assert (cells["invalid"], cells["failed"], cells["error"]) == ("1", "0", "0")


def test_summary_json_is_strict(tmp_path, capsys):
    """A point without decided samples has a nan fraction: written as null."""
    from sweep.report.stats import to_json
    attrs, rows, pts = read_results(_one_invalid(tmp_path))
    text = to_json(summarise(attrs, rows, pts))
    assert "NaN" not in text and json.loads(text)["points"][0]["nonseparable_fraction"][
        "fraction"] is None


def _one_invalid(tmp_path):
    np.save(tmp_path / "bad.npy", np.eye(16) / 2)
    out = tmp_path / "i.h5"
    run_sweep(parse_spec({"scenario": {"dims": [2, 2, 2, 2]},
                          "family": {"kind": "files", "paths": [str(tmp_path / "bad.npy")]},
                          "run": {"cluster": "serial", "progress": False}}), str(out))
    return out

