"""``cluster: allocation`` against a real one-node SLURM (tests/sweep/slurm.py): the whole
sweep as one batch job, cancelled mid-run and resubmitted."""

import json
import re
import sys
import time
from pathlib import Path

import pytest
import yaml

from sweep.execution.clusters import open_client
from sweep.errors import UserError
from sweep.storage.progress import read_progress
from sweep.spec.run import RunSpec
from sweep.storage.results import read_results
from tests.sweep.slurm import slurm  # noqa: F401 - the module's SLURM fixture

pytestmark = pytest.mark.cluster
# 60 two-qubit samples, 2 per task
SPEC = {"scenario": {"dims": [2, 2, 2, 2]},
        "family": {"kind": "ensemble", "measure": "valid_direction"},
        "grid": [{"param": "u", "values": [0.9, 1.0]}],
        "compute": {"samples": 30, "seed": 11, "robustness": ["random", "generalized"]},
        "run": {"samples_per_task": 2}}
LINE = "orderless run spec.yaml -o out.h5 --cluster allocation"


def _submit(slurm, folder: Path, env) -> str:  # noqa: F811
    out = slurm.run("sbatch", "-n", "2", "-o", "job-%j.log", "--wrap", LINE, cwd=folder,
                    env=env).stdout
    return re.search(r"Submitted batch job (\d+)", out).group(1)


def _progress(out: Path) -> int:
    """Samples this run has stored, from the driver's progress file (sweep.storage.progress)."""
    return int((read_progress(out) or {}).get("computed", 0))


def test_cancelled_allocation_resumes_computing_only_what_is_missing(slurm, tmp_path):  # noqa: F811
    """sbatch -n 2 --wrap "orderless run SPEC -o OUT.h5 --cluster allocation": scancel once
    results are stored, then the same line again: it stores only the missing samples, each
    sample once; the first run is recorded as terminated (SIGTERM, handled by the run loop,
    closed the file)."""
    (tmp_path / "spec.yaml").write_text(yaml.safe_dump(SPEC))
    env = {**slurm.env, "PATH": f"{Path(sys.executable).parent}:{slurm.env['PATH']}"}
    first = _submit(slurm, tmp_path, env)
    log = tmp_path / f"job-{first}.log"
    deadline = time.monotonic() + 240
    while _progress(tmp_path / "out.h5") < 8:
        assert first in slurm.jobs(), log.read_text() if log.exists() else "no log"
        assert time.monotonic() < deadline, "no progress within 240 s"
        time.sleep(0.2)
    slurm.run("scancel", first)
    assert slurm.wait_job(first) == "CANCELLED"
    attrs, s, _ = read_results(tmp_path / "out.h5")
    stored = len(s)
    assert 8 <= stored < 60
    assert json.loads(attrs["runs"])[-1]["state"] == "terminated"

    second = _submit(slurm, tmp_path, env)
    assert slurm.wait_job(second, timeout=300) == "COMPLETED"
    text = (tmp_path / f"job-{second}.log").read_text()
    assert f"{60 - stored} computed, {stored} already stored, 60 in the spec" in text, text
    attrs, s, _ = read_results(tmp_path / "out.h5")
    assert sorted(s["index"].tolist()) == list(range(60))
    assert all(st == b"ok" for st in s["status"])
    runs = json.loads(attrs["runs"])
    assert [r["cluster"] for r in runs] == ["allocation"] * 2
    assert runs[-1]["state"] == "complete" and runs[-1]["computed"] == 60 - stored
    workers = {w.decode() for w in s["worker"]}
    assert workers <= {f"slurm-{job}.{task}" for job in (first, second) for task in (0, 1)}
    assert {f"slurm-{second}.0", f"slurm-{second}.1"} <= workers  # a worker per task


def test_allocation_outside_slurm_is_a_one_line_error(monkeypatch):
    monkeypatch.delenv("SLURM_JOB_ID", raising=False)
    with pytest.raises(UserError, match="runs inside a SLURM allocation"):
        with open_client(RunSpec(cluster="allocation")):
            pass



def test_workers_that_cannot_start_end_the_run_with_one_line(slurm, tmp_path):  # noqa: F811
    """More workers than the allocation has tasks: srun refuses the step, and the run stops
    with a one-line error instead of waiting run.start_timeout."""
    (tmp_path / "spec.yaml").write_text(yaml.safe_dump(SPEC))
    env = {**slurm.env, "PATH": f"{Path(sys.executable).parent}:{slurm.env['PATH']}"}
    out = slurm.run("sbatch", "-n", "1", "-o", "job-%j.log", "--wrap", LINE + " --workers 3",
                    cwd=tmp_path, env=env).stdout
    job = re.search(r"Submitted batch job (\d+)", out).group(1)
    assert slurm.wait_job(job, timeout=120) == "FAILED"
    log = (tmp_path / f"job-{job}.log").read_text()
    errors = [line for line in log.splitlines() if line.startswith("orderless run: error:")]
    assert len(errors) == 1 and "the workers' srun ended (exit code" in errors[0], log
