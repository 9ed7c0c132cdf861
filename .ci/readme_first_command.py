"""CI step: the README's first command, exactly as written, on a fresh virtual environment.

Parses the first fenced block of README.md and takes its first command line (never a copy of
it), makes a clean copy of the checkout (tracked and untracked-but-not-ignored files), creates
a new venv with no access to this interpreter's packages, runs the command there with the
venv first on PATH, and checks what a new user would see: exit 0, the results file written
and complete, its summary printed, no Python warning and no traceback.  Prints the venv's path
on its last line (CI hands it to the test that imports every module without the test extra).

Usage: python .ci/readme_first_command.py WORKDIR
"""

from __future__ import annotations

import os
import re
import shutil
import subprocess
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
RESULTS = "results/demo.h5"  # where the README says the demo writes, inside the checkout
WARNING = re.compile(r"\b\w*(Warning|Error):|Traceback \(most recent call last\)")


def first_command() -> str:
    text = (ROOT / "README.md").read_text()
    block = re.search(r"```[a-z]*\n(.*?)```", text, re.S)
    if block is None:
        sys.exit("README.md has no fenced block")
    lines = [ln for ln in block.group(1).splitlines() if ln.strip()]
    return lines[0]


def clean_copy(dest: Path) -> None:
    listed = subprocess.run(["git", "ls-files", "-co", "--exclude-standard", "-z"], cwd=ROOT,
                            check=True, capture_output=True).stdout.decode().split("\0")
    for rel in filter(None, listed):
        src = ROOT / rel
        if src.is_file():
            (dest / rel).parent.mkdir(parents=True, exist_ok=True)
            shutil.copy2(src, dest / rel)


def fail(msg: str, out: str = "", err: str = "") -> None:
    print(f"readme-first-command: FAILED: {msg}", file=sys.stderr)
    for name, text in (("stdout", out), ("stderr", err)):
        if text:
            print(f"--- {name} (last 40 lines) ---\n" + "\n".join(text.splitlines()[-40:]),
                  file=sys.stderr)
    sys.exit(1)


def main(work: Path) -> None:
    command = first_command()
    checkout, venv = work / "checkout", work / "venv"
    for p in (checkout, venv):
        shutil.rmtree(p, ignore_errors=True)
    checkout.mkdir(parents=True)
    clean_copy(checkout)
    subprocess.run([sys.executable, "-m", "venv", str(venv)], check=True)
    env = {k: v for k, v in os.environ.items() if k not in ("PYTHONPATH", "PYTHONHOME")}
    env.update(PATH=f"{venv / 'bin'}{os.pathsep}{env.get('PATH', '')}", VIRTUAL_ENV=str(venv),
               DASK_CONFIG=str(work / "dask-config"), MPLBACKEND="Agg")
    print(f"readme-first-command: {command!r} in a new venv at {venv}", flush=True)
    run = subprocess.run(["bash", "-c", command], cwd=checkout, env=env, capture_output=True,
                         text=True, timeout=1800)
    out, err = run.stdout, run.stderr
    if run.returncode != 0:
        fail(f"exit code {run.returncode}", out, err)
    check = subprocess.run(
        [str(venv / "bin" / "python"), "-c",
         "import h5py, sys; f = h5py.File(sys.argv[1], 'r'); "
         "print(f.attrs['format'], int(f.attrs['committed']), int(f.attrs['n_samples']))",
         str(checkout / RESULTS)], capture_output=True, text=True)
    if check.returncode != 0:
        fail(f"{RESULTS} was not written or is unreadable: {check.stderr.strip()[-300:]}",
             out, err)
    fmt, committed, total = check.stdout.split()
    if fmt != "orderless-sweep" or committed != total:
        fail(f"{RESULTS}: format {fmt}, {committed} of {total} samples committed", out, err)
    if f"samples stored: {total}/{total}" not in out:
        fail("the summary of the demo was not printed", out, err)
    bad = [ln for ln in (out + "\n" + err).splitlines() if WARNING.search(ln)]
    if bad:
        fail(f"the demo printed warnings or tracebacks: {bad[:5]}", out, err)
    print(f"readme-first-command: ok ({committed} samples, summary printed, no warnings)")
    print(venv)


if __name__ == "__main__":
    main(Path(sys.argv[1]).resolve())
