"""``orderless cancel ID``: stop a remote sweep's driver (scancel, or SIGTERM to its process).
The results file keeps every committed row; ``orderless submit --remote NAME --resume ID``
continues it."""

from __future__ import annotations

import argparse


def register(sub: argparse._SubParsersAction) -> None:
    p = sub.add_parser("cancel", help="stop a remote sweep's driver (its results are kept)")
    p.add_argument("id", help="sweep id (or a unique prefix)")
    p.set_defaults(func=run)


def run(args: argparse.Namespace) -> int:
    from sweep.remote.registry import find
    from sweep.remote.ops import cancel
    entry = find(args.id)
    how = cancel(entry)
    print(f"cancelled {entry.id} ({how}); `orderless submit --remote {entry.remote} --resume "
          f"{entry.id}` continues it")
    return 0
