"""``orderless plot FILE.h5 -o fig.png``: fraction nonseparable and robustness against a grid
axis, with confidence bands and known thresholds (:mod:`sweep.report.plot`)."""

from __future__ import annotations

import argparse
import json

from sweep.report.plot import make_figure
from sweep.storage.results import read_results
from sweep.report.stats import summarise


def register(sub: argparse._SubParsersAction) -> None:
    p = sub.add_parser("plot", help="plot fraction nonseparable and robustness vs a grid axis")
    p.add_argument("file", help="HDF5 results file written by `orderless run`")
    p.add_argument("-o", "--output", required=True, help="figure file (.png, .pdf, .svg)")
    p.add_argument("--axis", help="grid axis for the x axis (default: the first)")
    p.add_argument("--ci", choices=["wilson", "exact"], default="wilson",
                   help="confidence interval: Wilson score or Clopper-Pearson ('exact')")
    p.set_defaults(func=run)


def run(args: argparse.Namespace) -> int:
    attrs, samples, points = read_results(args.file)
    tol = float(json.loads(attrs["spec_json"])["compute"]["tol"])
    summary = summarise(attrs, samples, points, method=args.ci)
    make_figure(summary, samples, args.output, args.axis, tol)
    note = " (sweep still running: the figure shows the samples stored so far)" \
        if summary["live"] else ""
    print(f"wrote {args.output}{note}")
    return 0
