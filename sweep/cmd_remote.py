"""``orderless submit / status / fetch / cancel``: sweeps on a remote machine over SSH.

``submit SPEC --remote NAME`` validates the spec here, copies it (and the files it reads) to
a new folder on the remote and starts the driver there, detached; it prints the sweep id.
``status [ID]`` lists the known sweeps, or shows one: queue state, samples committed, rate,
ETA and last error, read from the remote's progress file.  ``fetch ID`` copies back a
consistent results file (the snapshot while the sweep runs).  ``cancel ID`` stops the
driver; ``submit --resume ID`` continues the same file.  See :mod:`sweep.remote_ops`.
"""

from __future__ import annotations

import argparse
import json
from dataclasses import asdict
from pathlib import Path

from .errors import UserError
from .registry import find, load_entries, registry_path
from .remote_ops import cancel, fetch, remote_status, submit
from .remote_spec import load_remote


def register(sub: argparse._SubParsersAction) -> None:
    p = sub.add_parser("submit", help="start a sweep on a remote machine over SSH")
    p.add_argument("spec", nargs="?", help="YAML job spec (not needed with --resume)")
    p.add_argument("--remote", required=True, help="a remote of the profile file")
    p.add_argument("--profiles", help="profile file (default $ORDERLESS_PROFILES or "
                   "./orderless-profiles.yaml)")
    p.add_argument("--resume", metavar="ID", help="continue a stopped sweep in its folder")
    p.set_defaults(func=run_submit)
    p = sub.add_parser("status", help="state of remote sweeps (all known, or one)")
    p.add_argument("id", nargs="?", help="sweep id (or a unique prefix)")
    p.add_argument("--json", action="store_true", help="print JSON")
    p.set_defaults(func=run_status)
    p = sub.add_parser("fetch", help="copy a remote sweep's results file back")
    p.add_argument("id", help="sweep id (or a unique prefix)")
    p.add_argument("-o", "--output", help="local file (default results/<id>.h5)")
    p.set_defaults(func=run_fetch)
    p = sub.add_parser("cancel", help="stop a remote sweep's driver (results are kept)")
    p.add_argument("id", help="sweep id (or a unique prefix)")
    p.set_defaults(func=run_cancel)


def run_submit(args: argparse.Namespace) -> int:
    remote, path = load_remote(args.remote, args.profiles)
    if args.resume is None:
        if not args.spec:
            raise UserError("submit: give a SPEC file, or --resume ID")
        spec = Path(args.spec)
    else:
        spec = Path(find(args.resume).local_spec)
    entry = submit(spec, args.remote, remote, path, resume=args.resume)
    how = f"batch job {entry.job}" if entry.start == "sbatch" else f"process {entry.job}"
    print(f"{'resumed' if args.resume else 'submitted'} {entry.id} on {entry.remote} "
          f"({entry.destination}:{entry.folder}, {how})")
    print(entry.id)
    return 0


def _progress_line(p: dict) -> str:
    done, total = p.get("committed"), p.get("n_samples")
    rate, eta = p.get("rate"), p.get("eta_s")
    parts = [f"{done}/{total} committed" if done is not None else "no progress yet"]
    if rate:
        parts.append(f"{rate:.3g} samples/s")
    if eta is not None:
        parts.append(f"ETA {eta:.0f} s")
    return ", ".join(parts)


def run_status(args: argparse.Namespace) -> int:
    if args.id is None:
        entries = load_entries()
        if args.json:
            print(json.dumps([asdict(e) for e in entries], indent=2))
        elif not entries:
            print(f"no sweeps submitted yet (registry {registry_path()})")
        for e in entries if not args.json else ():
            print(f"{e.id:<44} {e.remote:<12} {e.submitted:<25} {e.state}")
        return 0
    entry = find(args.id)
    st = remote_status(entry)
    p = st.progress or {}
    out = {"id": entry.id, "remote": entry.remote, "folder": entry.folder,
           "driver": {"start": entry.start, "job": entry.job, "queue_state": st.queue,
                      "running": st.running},
           "progress": st.progress, "log_tail": st.log_tail}
    if args.json:
        print(json.dumps(out, indent=2))
        return 0
    how = f"batch job {entry.job}" if entry.start == "sbatch" else f"process {entry.job}"
    print(f"sweep       {entry.id} on {entry.remote} ({entry.destination}:{entry.folder})")
    print(f"driver      {how}: {st.queue}")
    print(f"run state   {p.get('state', 'unknown')}")
    print(f"samples     {_progress_line(p)}")
    print(f"last error  {p.get('last_error') or 'none'}")
    return 0


def run_fetch(args: argparse.Namespace) -> int:
    entry = find(args.id)
    out = Path(args.output or f"results/{entry.id}.h5")
    path, name = fetch(entry, out)
    print(f"fetched {name} of {entry.id} -> {path}")
    return 0


def run_cancel(args: argparse.Namespace) -> int:
    entry = find(args.id)
    how = cancel(entry)
    print(f"cancelled {entry.id} ({how}); `orderless submit --remote {entry.remote} --resume "
          f"{entry.id}` continues it")
    return 0
