"""Provenance of files families (issue 12): the operators' sha256 is what identifies them,
paths are stored as written, relative to the spec."""

import hashlib
import json
import shutil

import h5py
import numpy as np
import pytest

from sweep.cli.main import main
from sweep.errors import UserError
from sweep.planning.plan import Plan, operator_digest, plan_from_task_json
from sweep.spec.model import load_spec
from workers.operators.families import ocb_process

SPEC = "scenario: {dims: [2,2,2,2]}\nfamily: {kind: files, paths: [data/ops.npy]}\n" \
       "run: {cluster: serial, progress: false}\n"


@pytest.fixture
def project(tmp_path):
    """The issue's reproduction: OCB and white noise twice, in data/ops.npy beside a spec."""
    root = tmp_path / "proj"
    (root / "data").mkdir(parents=True)
    W, noise = ocb_process().matrix, np.eye(16) / 4
    np.save(root / "data" / "ops.npy", np.stack([W, noise, W, noise]))
    (root / "spec.yaml").write_text(SPEC)
    return root


def _interrupt(path, committed=2):
    with h5py.File(path, "r+") as f:  # the state a Ctrl-C leaves
        f.attrs["committed"] = committed


def test_digest_is_sha256_of_the_operators(project):
    """Documented digest: sha256 of the complex128 little-endian C-order operators."""
    ops = np.load(project / "data" / "ops.npy")
    expected = hashlib.sha256(ops.astype("<c16").tobytes()).hexdigest()
    assert operator_digest(ops) == expected
    plan = Plan(load_spec(project / "spec.yaml"))
    assert plan.file_digests == [{"path": "data/ops.npy", "sha256": expected, "operators": 4}]


def test_changed_operators_refused_naming_the_file(project, capsys):
    out = str(project / "res.h5")
    assert main(["run", str(project / "spec.yaml"), "-o", out]) == 0
    with h5py.File(out, "r") as f:
        assert "data/ops.npy" in f.attrs["spec_yaml"] and str(project) not in f.attrs["spec_yaml"]
        assert json.loads(f.attrs["files"])[0]["path"] == "data/ops.npy"
    _interrupt(out)
    np.save(project / "data" / "ops.npy", np.stack([np.eye(16) / 4] * 4))
    capsys.readouterr()
    assert main(["run", str(project / "spec.yaml"), "-o", out]) == 2
    err = capsys.readouterr().err.strip()
    assert len(err.splitlines()) == 1
    assert "family.paths[0] 'data/ops.npy' changed since" in err and "sha256" in err
    with h5py.File(out, "r") as f:
        assert int(f.attrs["committed"]) == 2  # nothing mixed in


def test_moved_spec_and_data_folder_resumes(project, tmp_path, capsys):
    out = project / "res.h5"
    assert main(["run", str(project / "spec.yaml"), "-o", str(out)]) == 0
    _interrupt(out)
    moved = tmp_path / "elsewhere" / "proj"
    shutil.move(str(project), str(moved))
    capsys.readouterr()
    assert main(["run", str(moved / "spec.yaml"), "-o", str(moved / "res.h5")]) == 0
    assert "2 computed, 2 already stored" in capsys.readouterr().out


def test_workers_refuse_operators_changed_during_a_run(project):
    """The workers check the digests the driver read: a file edited mid-run stops it."""
    plan = Plan(load_spec(project / "spec.yaml"))
    task = plan.task_json()
    assert plan_from_task_json(task).files.shape == (4, 16, 16)
    np.save(project / "data" / "ops.npy", np.stack([np.eye(16) / 4] * 4))
    with pytest.raises(UserError, match="changed while the sweep ran"):
        plan_from_task_json(task)
