"""``orderless summary FILE.h5 [--json]``: per-grid-point statistics of a results file."""

from __future__ import annotations

import argparse

from sweep.report.stats import format_table, summarise, to_json
from sweep.storage.results import read_results


def register(sub: argparse._SubParsersAction) -> None:
    p = sub.add_parser("summary", help="statistics per grid point of a results file")
    p.add_argument("file", help="HDF5 results file written by `orderless run`")
    p.add_argument("--json", action="store_true", help="print JSON instead of a table")
    p.add_argument("--ci", choices=["wilson", "exact"], default="wilson",
                   help="confidence interval: Wilson or Clopper-Pearson ('exact')")
    p.set_defaults(func=run)


def run(args: argparse.Namespace) -> int:
    summary = summarise(*read_results(args.file), method=args.ci)
    print(to_json(summary) if args.json else format_table(summary))
    return 0
