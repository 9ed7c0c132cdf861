"""``orderless snapshot FILE.h5 -o COPY.h5``: a consistent copy of a results file, also while
the sweep is writing it (a byte copy of a live HDF5 file may be unreadable)."""

from __future__ import annotations

import argparse

from sweep.storage.live import snapshot


def register(sub: argparse._SubParsersAction) -> None:
    p = sub.add_parser("snapshot", help="consistent copy of a results file (also while the "
                       "sweep runs), e.g. to copy it to another machine")
    p.add_argument("file", help="HDF5 results file of `orderless run`")
    p.add_argument("-o", "--output", required=True, help="the copy to write")
    p.set_defaults(func=run)


def run(args: argparse.Namespace) -> int:
    print(f"wrote {snapshot(args.file, args.output)}")
    return 0
