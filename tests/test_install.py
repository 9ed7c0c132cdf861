"""The base install (no extras) runs the tool: every module of workers/ and sweep/ imports in
an environment that has only ``[project].dependencies``.

CI passes the fresh venv in which it ran the README's first command
(``ORDERLESS_FRESH_VENV``, see .ci/run); elsewhere the test builds one itself, once, in
pytest's cache (about a minute), keyed by pyproject.toml.  Optional features may import
their extras lazily only, which is what this test enforces.
"""

from __future__ import annotations

import hashlib
import os
import subprocess
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
TEST_ONLY = ("pytest", "sympy", "dask_jobqueue")  # the test extra (and the jobqueue extra)

IMPORT_ALL = """
import importlib, pkgutil, sys
for name in {test_only!r}:
    try:
        importlib.import_module(name)
    except ImportError:
        continue
    sys.exit(f"{{name}} is installed: not an environment without the test extra")
count = 0
for pkg in ("workers", "sweep"):
    mod = importlib.import_module(pkg)
    for info in pkgutil.walk_packages(mod.__path__, pkg + "."):
        importlib.import_module(info.name)
        count += 1
print(count, mod.__file__)
"""


def _fresh_venv_python(cache_dir: Path) -> Path:
    given = os.environ.get("ORDERLESS_FRESH_VENV")
    if given:
        return Path(given) / "bin" / "python"
    key = hashlib.sha256((ROOT / "pyproject.toml").read_bytes()).hexdigest()[:12]
    venv = cache_dir / f"venv-{key}"
    python = venv / "bin" / "python"
    if not python.exists():
        subprocess.run([sys.executable, "-m", "venv", str(venv)], check=True)
        subprocess.run([str(python), "-m", "pip", "install", "-q", "-e", str(ROOT)],
                       check=True, capture_output=True)
    return python


def test_every_module_imports_without_the_test_extra(request, tmp_path_factory):
    cache = getattr(request.config, "cache", None)  # None under -p no:cacheprovider
    folder = cache.mkdir("orderless-base-install") if cache else tmp_path_factory.mktemp("v")
    python = _fresh_venv_python(Path(folder))
    env = {k: v for k, v in os.environ.items() if k not in ("PYTHONPATH", "PYTHONHOME")}
    run = subprocess.run([str(python), "-c", IMPORT_ALL.format(test_only=TEST_ONLY)],
                         capture_output=True, text=True, cwd="/", env=env)
    assert run.returncode == 0, run.stderr[-2000:]
    count, where = run.stdout.split()
    assert int(count) >= 40  # every module of both packages, not an empty walk
    assert Path(where).name == "__init__.py"
