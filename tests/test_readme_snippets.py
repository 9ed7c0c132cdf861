"""Every Python code block in README.md runs as written.

The blocks that read ``results/ocb.h5`` get the file the README's "Sweeps" section makes
(``orderless run job_specs/ocb_white_noise.yaml -o results/ocb.h5``), made here in a
temporary folder with ``--cluster serial`` (the same rows, without starting dask workers).
"""

from __future__ import annotations

import re
from pathlib import Path

import numpy as np
import pytest

from sweep.cli.main import main

ROOT = Path(__file__).resolve().parents[1]
BLOCKS = re.findall(r"```python\n(.*?)```", (ROOT / "README.md").read_text(), re.S)
SWEEP_COMMAND = "orderless run job_specs/ocb_white_noise.yaml -o results/ocb.h5"


def test_the_readme_has_python_blocks_and_the_sweep_command():
    assert len(BLOCKS) >= 3
    assert any("from workers import" in block for block in BLOCKS)
    assert SWEEP_COMMAND in (ROOT / "README.md").read_text()


@pytest.fixture(scope="module")
def readme_folder(tmp_path_factory):
    folder = tmp_path_factory.mktemp("readme")
    spec = ROOT / "job_specs" / "ocb_white_noise.yaml"
    out = folder / "results" / "ocb.h5"
    assert main(["run", str(spec), "-o", str(out), "--cluster", "serial", "--no-progress"]) == 0
    return folder


@pytest.mark.parametrize("index", range(len(BLOCKS)))
def test_block_runs(index, readme_folder, monkeypatch):
    monkeypatch.chdir(readme_folder)
    namespace: dict = {}
    exec(compile(BLOCKS[index], f"README.md python block {index + 1}", "exec"), namespace)
    if "res" in namespace:  # the Python API block: OCB R_r = √2 − 1 (workers/THEORY.md §5)
        assert namespace["res"].verdict == "nonseparable"
        assert abs(namespace["res"].robustness("random") - (np.sqrt(2) - 1)) < 1e-6
        assert len(namespace["results"]) == 64
    if "snapshot" in namespace:  # the readers' block wrote its copy
        assert (readme_folder / "copy.h5").exists() and namespace["n"] == 26
