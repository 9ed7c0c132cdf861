"""The README's promises: set-up commands, CI running the same test command, spec reference."""

import re
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]


def _first_block() -> list[str]:
    text = (ROOT / "README.md").read_text()
    block = re.search(r"```[a-z]*\n(.*?)```", text, re.S).group(1)
    return [line for line in block.splitlines() if line.strip()]


def test_first_block_has_demo_then_tests():
    lines = _first_block()
    assert len(lines) == 2
    assert "orderless demo" in lines[0] and "pytest" in lines[1]


def test_ci_runs_the_readme_test_command():
    ci = (ROOT / ".ci" / "run").read_text()
    assert _first_block()[1] in ci


def test_spec_reference_is_current():
    """The README's spec reference is the one generated from the pydantic model."""
    from sweep.spec.doc import markdown_reference

    assert markdown_reference().strip() in (ROOT / "README.md").read_text()


def test_ci_runs_the_readme_first_command_parsed_from_the_readme():
    """CI proves the first command on a fresh venv by parsing it from README.md, so the
    README cannot drift from what CI runs (issue: a green CI once hid a missing dependency)."""
    ci = (ROOT / ".ci" / "run").read_text()
    assert "readme_first_command.py" in ci
    script = (ROOT / ".ci" / "readme_first_command.py").read_text()
    assert "README.md" in script and "-m\", \"venv\"" in script
    assert _first_block()[0] not in script  # parsed, not copied
