"""``orderless fetch ID [-o FILE]``: copy back a consistent results file of a remote sweep,
complete or partial (the remote's snapshot of the committed rows, also while it runs)."""

from __future__ import annotations

import argparse
from pathlib import Path


def register(sub: argparse._SubParsersAction) -> None:
    p = sub.add_parser("fetch", help="copy a remote sweep's results file back (also while "
                       "it runs)")
    p.add_argument("id", help="sweep id (or a unique prefix)")
    p.add_argument("-o", "--output", help="local file (default results/<id>.h5)")
    p.set_defaults(func=run)


def run(args: argparse.Namespace) -> int:
    from sweep.remote.registry import find
    from sweep.remote.ops import fetch
    entry = find(args.id)
    out = fetch(entry, Path(args.output or f"results/{entry.id}.h5"))
    print(f"fetched {entry.id} -> {out}")
    return 0
