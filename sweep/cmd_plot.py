"""``orderless plot FILE.h5 -o fig.png``: fraction nonseparable with CI bands, histograms."""

from __future__ import annotations

import argparse

from .plot import make_figure
from .stats import summarise
from .results import read_results


def register(sub: argparse._SubParsersAction) -> None:
    p = sub.add_parser("plot", help="plot fraction nonseparable vs a grid axis, and robustness")
    p.add_argument("file", help="HDF5 results file written by `orderless run`")
    p.add_argument("-o", "--output", required=True, help="figure file (.png, .pdf, .svg)")
    p.add_argument("--axis", help="grid axis for the x axis (default: the first)")
    p.set_defaults(func=run)


def run(args: argparse.Namespace) -> int:
    attrs, samples, points = read_results(args.file)
    make_figure(summarise(attrs, samples, points), samples, args.output, args.axis)
    print(f"wrote {args.output}")
    return 0
