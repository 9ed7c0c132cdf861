"""``orderless demo``: a small bundled sweep on the local default cluster, then its summary.

Measure: ``valid_direction`` (workers/operators/ensembles.py) for two qubit parties, on a grid of
the fraction u of the distance to the PSD boundary; the summary shows how the fraction of causally
nonseparable operators grows with u.  About 350 bipartite qubit solves (a few seconds of
solver time) plus the start-up of the local cluster.
"""

from __future__ import annotations

import argparse
from pathlib import Path

from .run import print_summary
from sweep.execution.execute import run_sweep
from sweep.spec.model import parse_spec
from sweep.spec.run import resolve_run

DEMO_SPEC = {
    "scenario": {"dims": [2, 2, 2, 2]},
    "family": {"kind": "ensemble", "measure": "valid_direction"},
    "grid": [{"param": "u", "start": 0.5, "stop": 1.0, "num": 11}],
    "compute": {"robustness": ["random"], "samples": 32, "seed": 20261202, "eps": 1e-6},
    "run": {"cluster": "local", "samples_per_task": 16},
}


def register(sub: argparse._SubParsersAction) -> None:
    p = sub.add_parser("demo", help="run the bundled demo sweep locally and print its summary")
    p.add_argument("-o", "--output", default="results/demo.h5",
                   help="results file (default results/demo.h5 in the current directory)")
    p.add_argument("--workers", type=int, help="local worker processes (default: one per core)")
    p.add_argument("--fresh", action="store_true", help="delete an existing demo file first")
    p.set_defaults(func=run)


def run(args: argparse.Namespace) -> int:
    spec = parse_spec(DEMO_SPEC, "demo spec")
    out = Path(args.output)
    if args.fresh and out.exists():
        out.unlink()
    run_spec = resolve_run(spec.run, {"workers": args.workers})
    print(f"demo: {spec.family.measure} ensemble, two qubit parties, grid over u, "
          f"{spec.compute.samples} samples per point -> {out}")
    outcome = run_sweep(spec, str(out), run_spec)
    print(f"{outcome.computed} computed, {outcome.already_done} already stored "
          f"({outcome.elapsed:.1f} s)")
    print_summary(str(out), False)
    return 0
