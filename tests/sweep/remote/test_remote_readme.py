"""The README's "From a laptop" section stays true: its remote is a valid `remotes` entry
(sweep.remote.spec.RemoteSpec), and each of its commands is a valid orderless command line of
the forms tests/sweep/remote/test_remote_slurm.py runs."""

from __future__ import annotations

import re
import shlex
from pathlib import Path

import yaml

from sweep.cli.main import build_parser
from sweep.remote.spec import RemoteSpec

ROOT = Path(__file__).resolve().parents[3]


def _section() -> str:
    text = (ROOT / "README.md").read_text()
    return text.split("## From a laptop", 1)[1].split("\n## ", 1)[0]


def test_the_remote_of_the_readme_validates():
    block = re.search(r"```yaml\n(.*?)```", _section(), re.S).group(1)
    remotes = yaml.safe_load(block)["remotes"]
    for name, entry in remotes.items():
        spec = RemoteSpec.model_validate(entry)
        assert spec.start == "sbatch" and spec.cluster == "allocation", name


def test_the_commands_of_the_readme_parse():
    block = re.search(r"```bash\n(.*?)```", _section(), re.S).group(1)
    commands = [shlex.split(line.split("#", 1)[0]) for line in block.splitlines()
                if line.strip()]
    assert [c[1] for c in commands] == ["submit", "status", "status", "fetch", "cancel",
                                        "submit"]
    tested = (ROOT / "tests" / "sweep" / "remote" / "test_remote_slurm.py").read_text()
    for argv in commands:
        assert argv[0] == "orderless"
        args = build_parser(argv[1]).parse_args(argv[1:])
        assert args.command == argv[1]
        assert f'"{argv[1]}"' in tested  # the test runs this command
