"""Every file that a document, docstring, comment or spec points to exists in the repository,
and every section of the mathematical reference that is cited exists (common practice: a
link checker).  The repository stands on its own: nothing points outside it."""

from __future__ import annotations

import re
import subprocess
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
THEORY = ROOT / "workers" / "THEORY.md"
TOP = ("workers", "sweep", "tests", "bench", "job_specs", "docker", ".ci")
SUFFIXES = (".py", ".md", ".yaml", ".yml", ".toml", ".txt", ".def", ".conf", ".sh")
SKIP_DIRS = {".git", ".venv", "build", "dist", "results", "__pycache__", ".pytest_cache"}
PATH = re.compile(r"(?<![\w./-])((?:%s)/[\w./-]*[\w-])" % "|".join(re.escape(t) for t in TOP))
BARE_DOC = re.compile(r"(?<![\w./-])([A-Z][A-Z-]+\.md)\b")
SECTION = re.compile(r"THEORY\.md\s+§(§?)(\d+)(?:\s*(?:-|–|and|,)\s*(\d+))?")


def generated(target: str) -> bool:
    """A path the tools write (results, certificates): git-ignored, so it may not exist."""
    return any(subprocess.run(["git", "check-ignore", "-q", "--no-index", t],
                              cwd=ROOT).returncode == 0 for t in (target, target + "/"))


def scanned_files() -> list[Path]:
    out = []
    for p in ROOT.rglob("*"):
        rel = p.relative_to(ROOT)
        if any(part in SKIP_DIRS or part.endswith(".egg-info") for part in rel.parts):
            continue
        if p.is_file() and (p.suffix in SUFFIXES or p.name in ("Dockerfile", "run")):
            out.append(p)
    return sorted(out)


def _text(p: Path) -> str:
    return p.read_text(encoding="utf-8", errors="replace")


def theory_sections() -> set[int]:
    return {int(m) for m in re.findall(r"^## §(\d+)", _text(THEORY), re.M)}


def test_theory_reference_is_in_the_repository_and_packaged():
    assert THEORY.is_file()
    assert theory_sections() == set(range(1, 12))
    pyproject = _text(ROOT / "pyproject.toml")
    assert "THEORY.md" in pyproject  # shipped in the wheel beside the code that cites it


@pytest.mark.parametrize("path", scanned_files(), ids=lambda p: str(p.relative_to(ROOT)))
def test_every_pointer_resolves(path: Path):
    text = _text(path)
    missing = []
    for m in PATH.finditer(text):
        target = m.group(1).rstrip(".")
        if text[m.end():m.end() + 1] in ("<", "{", "*") or target.endswith("/"):
            continue  # a pattern such as tests/workers/test_<module>.py, not a file
        if not (ROOT / target).exists() and not generated(target):
            missing.append(target)
    for m in BARE_DOC.finditer(text):
        name = m.group(1)
        if not (ROOT / name).exists() and not list(ROOT.glob(f"**/{name}")):
            missing.append(name)
    sections = theory_sections()
    for m in SECTION.finditer(text):
        for g in (m.group(2), m.group(3)):
            if g is not None and int(g) not in sections:
                missing.append(f"THEORY.md §{g}")
    assert not missing, f"{path.relative_to(ROOT)} points to {sorted(set(missing))}"
