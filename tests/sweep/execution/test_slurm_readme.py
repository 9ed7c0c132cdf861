"""The README's worked SLURM example, run as written (its spec and commands are parsed from
README.md) against a one-node SLURM (tests/sweep/slurm.py), and the shipped profiles used."""

import re
import shutil
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

from sweep.storage.results import read_results
from tests.sweep.slurm import slurm  # noqa: F401 - the module's SLURM fixture

ROOT = Path(__file__).resolve().parents[3]
pytestmark = pytest.mark.cluster


def worked_example() -> tuple[str, list[str]]:
    """The spec (the yaml block) and the command lines (the bash blocks) of the README's
    "Worked example: SLURM"."""
    text = (ROOT / "README.md").read_text()
    section = text.split("### Worked example: SLURM", 1)[1].split("\n### ", 1)[0]
    spec = re.search(r"```yaml\n(.*?)```", section, re.S).group(1)
    lines = [line for block in re.findall(r"```bash\n(.*?)```", section, re.S)
             for line in block.splitlines() if line.strip()]
    return spec, lines


def test_worked_example_runs_as_written(slurm, tmp_path):  # noqa: F811
    spec, lines = worked_example()
    assert any("--profile slurm" in x for x in lines)
    assert any(x.startswith("sbatch") and "--cluster allocation" in x for x in lines)
    (tmp_path / "sweep.yaml").write_text(spec)
    (tmp_path / "job_specs").mkdir()
    shutil.copy(ROOT / "job_specs" / "profiles.yaml", tmp_path / "job_specs")
    env = {**slurm.env, "PATH": f"{Path(sys.executable).parent}:{slurm.env['PATH']}"}
    outputs = []
    for line in lines:
        proc = subprocess.run(["bash", "-c", line], cwd=tmp_path, env=env, text=True,
                              capture_output=True, timeout=300)
        assert proc.returncode == 0, (line, proc.stdout, proc.stderr)
        outputs.append(proc.stdout)
        if line.startswith("sbatch"):
            job = re.search(r"Submitted batch job (\d+)", proc.stdout).group(1)
            assert slurm.wait_job(job, timeout=300) == "COMPLETED", (
                (tmp_path / f"sweep-{job}.log").read_text())
    assert "6 computed, 0 already stored" in outputs[0]
    assert "samples stored: 6/6" in outputs[-1]  # the summary of the allocation's file
    results = []
    for name in ("jobs.h5", "alloc.h5"):
        _, s, _ = read_results(tmp_path / name)
        results.append(s[np.argsort(s["index"])])
    jobs, alloc = results
    assert jobs["index"].tolist() == alloc["index"].tolist() == list(range(6))
    for f in ("verdict", "certified", "r_random", "r_generalized", "cert_margin"):
        assert np.array_equal(jobs[f], alloc[f]), f
    assert {w.split(b".")[0] for w in alloc["worker"]} == {f"slurm-{job}".encode()}
