"""``orderless submit SPEC --remote NAME``: start a sweep on a remote machine over SSH.

The spec is validated here first (the same errors as ``run``), then copied with the files it
reads to a new folder on the remote, where the driver starts detached from the SSH session
(:mod:`sweep.remote.ops`).  Prints the sweep id.  ``--resume ID`` restarts the driver of a
stopped sweep in its folder: it computes only what is missing.
"""

from __future__ import annotations

import argparse
from pathlib import Path

from sweep.errors import UserError


def register(sub: argparse._SubParsersAction) -> None:
    p = sub.add_parser("submit", help="start a sweep on a remote machine over SSH")
    p.add_argument("spec", nargs="?", help="YAML job spec (not needed with --resume)")
    p.add_argument("--remote", required=True, help="a remote of the profile file")
    p.add_argument("--profiles", help="profile file (default $ORDERLESS_PROFILES or "
                   "./orderless-profiles.yaml)")
    p.add_argument("--resume", metavar="ID", help="continue a stopped sweep in its folder")
    p.set_defaults(func=run)


def run(args: argparse.Namespace) -> int:
    from sweep.remote.registry import find
    from sweep.remote.ops import submit
    from sweep.remote.spec import load_remote
    remote, path = load_remote(args.remote, args.profiles)
    if args.resume is None:
        if not args.spec:
            raise UserError("submit: give a SPEC file, or --resume ID")
        spec = Path(args.spec)
    elif args.spec:
        raise UserError("submit --resume ID continues the sweep's own spec; give no SPEC")
    else:
        spec = Path(find(args.resume).local_spec)
    entry = submit(spec, args.remote, remote, path, resume=args.resume)
    how = f"batch job {entry.job}" if entry.start == "sbatch" else f"process {entry.job}"
    print(f"{'resumed' if args.resume else 'submitted'} {entry.id} on {entry.remote} "
          f"({entry.destination}:{entry.folder}, {how})")
    print(entry.id)
    return 0
