"""Sweeps on a remote machine: submit, status, fetch, cancel, all through :mod:`sweep.remote.ssh`.

The remote holds one folder per sweep, ``<workdir>/<sweep id>/``::

    spec/<name>.yaml   the job spec, byte for byte (and the files a ``files`` family reads,
                       at the same places relative to it)
    profiles.yaml      the local profile file, when the remote uses one of its run profiles
    results.h5         the results file, written only by the remote driver
    driver.log         the driver's output (and sbatch's)
    driver.pid         the driver's process id (background start)

The driver runs detached from the SSH session (a batch job, or ``nohup setsid``), so the
laptop may sleep or lose its network.  Status and fetch never copy the live HDF5 file: they
run the remote's own ``orderless status --json`` (progress file and liveness lock,
:mod:`sweep.storage.status`) and ``orderless snapshot`` (a consistent copy,
:mod:`sweep.storage.live`), then copy that.
"""

from __future__ import annotations

import json
import os
import re
import secrets
import shutil
import tempfile
import time
from dataclasses import dataclass
from importlib import metadata
from pathlib import Path

import yaml

from sweep.errors import UserError
from .registry import SweepEntry, find, update
from .spec import RemoteSpec
from sweep.spec.model import load_spec
from .ssh import Remote, last_line, rjoin, rpath, sh_words

RESULTS = "results.h5"
LOG = "driver.log"
PIDFILE = "driver.pid"


def local_version() -> str:
    try:
        return metadata.version("orderless")
    except metadata.PackageNotFoundError:  # pragma: no cover - running from a plain checkout
        return "unknown"


def connect(name: str, spec: RemoteSpec) -> Remote:
    return Remote(name, spec.ssh, tuple(spec.ssh_options), tuple(spec.setup))


def check_remote_version(remote: Remote, command: str) -> str:
    """The remote orderless's version; a one-line error when it is missing or differs."""
    res = remote.run(sh_words([*_words(command), "--version"]), check=False,
                     what="probing the remote orderless")
    if res.returncode == 127 or "not found" in res.stderr:
        raise UserError(f"remote {remote.name!r}: orderless command {command!r} not found "
                        f"there ({last_line(res.stderr)}); set remotes.{remote.name}.command "
                        "to the remote orderless, e.g. ~/venv/bin/orderless")
    found = re.search(r"orderless (\S+)", res.stdout)
    if res.returncode != 0 or found is None:
        raise UserError(f"remote {remote.name!r}: {command!r} --version gave exit "
                        f"{res.returncode} ({last_line(res.stderr or res.stdout)}); expected "
                        "'orderless VERSION'")
    if found.group(1) != local_version():
        raise UserError(f"remote {remote.name!r} runs orderless {found.group(1)}, this machine "
                        f"{local_version()}; expected the same version on both (upgrade one)")
    return found.group(1)


def _words(command: str) -> list[str]:
    """The remote command as words; a leading ``~/`` stays for the remote to expand."""
    return command.split()


def _command_prefix(command: str) -> str:
    """The remote command as shell words, expanding a leading ``~/`` on the remote."""
    head, *rest = _words(command)
    return " ".join([rpath(head) if head.startswith("~") else sh_words([head]),
                     sh_words(rest)]).strip()


def new_id(spec_path: Path) -> str:
    stem = re.sub(r"[^A-Za-z0-9_.-]+", "_", spec_path.stem)[:40] or "sweep"
    return f"{stem}-{time.strftime('%Y%m%d-%H%M%S')}-{secrets.token_hex(2)}"


def stage(spec_path: Path, profile_file: Path | None, folder: Path) -> str:
    """Copy the spec, its data files and the profile file into ``folder``; return the spec's
    path relative to it.  Data files keep their place relative to the spec; a file outside
    the spec's folder is copied under ``spec/_files/`` and the copied spec points to it."""
    spec = load_spec(spec_path)  # the same errors as `orderless run`, before anything moves
    (folder / "spec").mkdir(parents=True)
    target = folder / "spec" / spec_path.name
    data = None
    if spec.family.kind == "files":
        base = spec_path.resolve().parent
        raw = yaml.safe_load(spec_path.read_text())
        new_paths = []
        for i, (given, resolved) in enumerate(zip(raw["family"]["paths"], spec.family.paths)):
            src = Path(resolved) if Path(resolved).is_absolute() else base / resolved
            rel = os.path.relpath(src.resolve(), base)
            if rel.startswith(".."):
                rel = f"_files/{i}-{src.name}"
            (folder / "spec" / rel).parent.mkdir(parents=True, exist_ok=True)
            shutil.copy2(src, folder / "spec" / rel)
            new_paths.append(rel)
        if new_paths != list(raw["family"]["paths"]):
            raw["family"]["paths"] = new_paths
            data = yaml.safe_dump(raw, sort_keys=False)
    if data is None:
        shutil.copy2(spec_path, target)
    else:
        target.write_text(data)
    if profile_file is not None:
        shutil.copy2(profile_file, folder / "profiles.yaml")
    return f"spec/{spec_path.name}"


def driver_command(spec: RemoteSpec, spec_rel: str) -> str:
    """The remote shell words that run the driver in the sweep folder."""
    argv = ["run", spec_rel, "-o", RESULTS, "--cluster", spec.cluster]
    if spec.profile is not None:
        argv += ["--profiles", "profiles.yaml", "--profile", spec.profile]
    return f"{_command_prefix(spec.command)} {sh_words(argv)}"


def start_driver(remote: Remote, spec: RemoteSpec, folder: str, spec_rel: str,
                 sweep_id: str) -> str:
    """Start the driver detached from the SSH session; return its batch job id or PID."""
    run = driver_command(spec, spec_rel)
    if spec.start == "sbatch":
        script = (f"cd {rpath(folder)} && sbatch --parsable "
                  f"{sh_words(['--job-name=orderless-' + sweep_id, '--output=' + LOG, *spec.sbatch])}"
                  f" --wrap={sh_words([run])}")
        out = remote.run(script, what="submitting the driver job with sbatch").stdout
        job = out.strip().split(";")[0]
        if not job.isdigit():
            raise UserError(f"remote {remote.name!r}: sbatch printed {out.strip()!r}; "
                            "expected a job id")
        return job
    script = (f"cd {rpath(folder)} || exit 1; nohup setsid {run} > {LOG} 2>&1 < /dev/null & "
              f"echo $! > {PIDFILE}; echo $!")
    pid = remote.run(script, what="starting the driver").stdout.strip()
    if not pid.isdigit():
        raise UserError(f"remote {remote.name!r}: the driver did not start ({pid!r})")
    return pid


def submit(spec_path: Path, name: str, spec: RemoteSpec, profile_file: Path,
           resume: str | None = None) -> SweepEntry:
    """Validate, copy and start a sweep on the remote (or continue ``resume``)."""
    remote = connect(name, spec)
    if resume is not None:
        entry = find(resume)
        if entry.remote != name:
            raise UserError(f"sweep {entry.id} ran on remote {entry.remote!r}, not {name!r}")
        state = remote_status(entry)
        if state.running:
            raise UserError(f"sweep {entry.id} is still running there ({state.queue}); "
                            "expected it stopped before --resume (orderless cancel ID)")
        check_remote_version(remote, spec.command)
        job = start_driver(remote, spec, entry.folder, entry.spec, entry.id)
        entry.history.append({"job": entry.job, "state": state.describe(), "until": _now()})
        entry.job, entry.state = job, "submitted"
        update(entry)
        return entry
    sweep_id = new_id(spec_path)
    folder = rjoin(spec.workdir, sweep_id)
    with tempfile.TemporaryDirectory(prefix="orderless-submit-") as tmp:
        spec_rel = stage(spec_path, profile_file if spec.profile else None, Path(tmp))
        check_remote_version(remote, spec.command)
        exists = remote.run(f"test -e {rpath(folder)} && echo yes || true",
                            what="checking the sweep folder").stdout.strip()
        if exists:
            raise UserError(f"remote {name!r}: {folder} already exists; expected a new folder")
        try:
            remote.upload_tree(Path(tmp), folder)
        except UserError:  # a partial copy (a full disk): remove it, nothing else was made
            remote.run(f"rm -rf {rpath(folder)}", check=False, what="removing the copy")
            raise
    try:
        job = start_driver(remote, spec, folder, spec_rel, sweep_id)
    except UserError:  # nothing ran: the folder holds only the copied inputs
        remote.run(f"rm -rf {rpath(folder)}", check=False, what="removing the sweep folder")
        raise
    entry = SweepEntry(sweep_id, name, spec.ssh, folder, spec_rel, RESULTS, spec.start, job,
                       _now(), str(spec_path.resolve()), list(spec.ssh_options),
                       list(spec.setup), spec.command)
    update(entry)
    return entry


def _now() -> str:
    return time.strftime("%Y-%m-%dT%H:%M:%S%z")


def remote_of(entry: SweepEntry) -> Remote:
    """The SSH connection recorded for a registry entry."""
    return Remote(entry.remote, entry.destination, tuple(entry.ssh_options),
                  tuple(entry.setup))


@dataclass(frozen=True)
class RemoteState:
    """What the remote says about a sweep: the driver's queue state, ``orderless status``
    of its results file (None before the driver wrote anything), the end of its log."""

    queue: str
    running: bool
    status: dict | None
    log_tail: str
    folder_exists: bool = True

    def describe(self) -> str:
        return f"{self.queue}; run {(self.status or {}).get('state', 'unknown')}"


ACTIVE = ("PENDING", "RUNNING", "CONFIGURING", "COMPLETING", "SUSPENDED", "REQUEUED",
          "RESIZING", "SIGNALING", "STAGE_OUT")


def _command_of(entry: SweepEntry) -> str:
    return _command_prefix(entry.command)


def remote_status(entry: SweepEntry) -> RemoteState:
    """Queue state, the remote's ``orderless status --json`` and the end of the driver's
    log, in one SSH call (the live HDF5 file is never copied)."""
    remote = remote_of(entry)
    if entry.start == "sbatch":
        queue = (f"scontrol show job -o {sh_words([entry.job])} 2>/dev/null | "
                 "sed -n 's/.*JobState=\\([A-Z_]*\\).*/\\1/p' | head -n 1")
    else:
        queue = (f"if kill -0 {sh_words([entry.job])} 2>/dev/null; then echo RUNNING; "
                 "else echo EXITED; fi")
    script = (f"cd {rpath(entry.folder)} 2>/dev/null || {{ echo @@missing; exit 0; }}; "
              f"echo @@queue; {queue}; echo @@status; "
              f"{_command_of(entry)} status {sh_words([entry.results, '--json'])} 2>/dev/null;"
              f" echo; echo @@log; tail -n 5 {LOG} 2>/dev/null; true")
    out = remote.run(script, what="reading the sweep's state").stdout
    if out.startswith("@@missing"):
        return RemoteState("MISSING", False, None, "", folder_exists=False)
    parts = dict(re.findall(r"@@(\w+)\n(.*?)(?=\n@@|\Z)", out, re.S))
    queue_state = parts.get("queue", "").strip() or "GONE"
    try:
        status = json.loads(parts.get("status", "").strip() or "null")
    except ValueError:
        status = None  # no results or progress file yet
    return RemoteState(queue_state, queue_state in ACTIVE, status,
                       parts.get("log", "").strip())


def fetch(entry: SweepEntry, out: Path) -> Path:
    """Copy back a consistent results file: the remote ``orderless snapshot`` of it (the
    committed rows, also while the driver writes), streamed through SSH.  It lands under a
    temporary name and is renamed once every committed row reads cleanly."""
    from sweep.storage.results import read_results

    remote = remote_of(entry)
    tmp = f".fetch-{secrets.token_hex(4)}.h5"
    script = (f"cd {rpath(entry.folder)} || exit 3; {_command_of(entry)} snapshot "
              f"{sh_words([entry.results, '-o', tmp])} >/dev/null || exit $?; "
              f"cat {tmp}; rc=$?; rm -f {tmp}; exit $rc")
    out.parent.mkdir(parents=True, exist_ok=True)
    part = out.with_name(out.name + ".part")
    try:
        remote.stream(script, part, what=f"copying a snapshot of {entry.results}")
        read_results(part)  # a clean read of every committed row, or a UserError
        os.replace(part, out)
    finally:
        part.unlink(missing_ok=True)
    return out


def cancel(entry: SweepEntry) -> str:
    """Stop the driver (scancel, or SIGTERM to its process); the file keeps what it has."""
    remote = remote_of(entry)
    if entry.start == "sbatch":
        remote.run(sh_words(["scancel", entry.job]), what="cancelling the driver job")
        how = f"scancel {entry.job}"
    else:
        pid = sh_words([entry.job])
        res = remote.run(f"cd {rpath(entry.folder)} && test \"$(cat {PIDFILE})\" = {pid} && "
                         f"kill -TERM {pid} && echo sent || echo gone",
                         what="stopping the driver")
        how = "SIGTERM" if res.stdout.strip() == "sent" else "already stopped"
    entry.state = "cancelled"
    update(entry)
    return how
