"""``orderless run SPEC.yaml -o OUT.h5``: run (or resume) a sweep and print its summary."""

from __future__ import annotations

import argparse
import json

from sweep.execution.execute import run_sweep
from sweep.execution.preflight import dry_run
from sweep.spec.model import load_spec
from sweep.spec.run import resolve_run


def register(sub: argparse._SubParsersAction) -> None:
    p = sub.add_parser("run", help="run or resume a sweep from a YAML job spec")
    p.add_argument("spec", help="YAML job spec (see `python -m sweep.spec --markdown`)")
    p.add_argument("-o", "--output", required=True, help="HDF5 results file (resumed if it "
                   "exists with the same spec)")
    p.add_argument("--profile", help="run profile from the profile file")
    p.add_argument("--profiles", help="profile file (default $ORDERLESS_PROFILES or "
                   "./orderless-profiles.yaml)")
    p.add_argument("--scheduler", dest="address", help="address of a running dask scheduler")
    p.add_argument("--cluster", choices=["local", "address", "jobqueue", "allocation", "serial"])
    p.add_argument("--workers", type=int, help="local worker processes")
    p.add_argument("--samples-per-task", dest="samples_per_task", type=int)
    p.add_argument("--no-progress", dest="progress", action="store_const", const=False)
    p.add_argument("--json", action="store_true", help="print the summary as JSON")
    p.add_argument("--dry-run", action="store_true", help="print what would be computed and "
                   "the estimated memory and time, then stop (nothing is started or written)")
    p.set_defaults(func=run)


def cli_overrides(args: argparse.Namespace) -> dict:
    """The run fields given on the command line (None = not given)."""
    keys = ("profile", "address", "cluster", "workers", "samples_per_task", "progress")
    return {k: getattr(args, k, None) for k in keys}


def print_summary(path: str, as_json: bool) -> None:
    from sweep.storage.results import read_results
    from sweep.report.stats import format_table, summarise, to_json  # scipy.stats: ~1 s to import
    summary = summarise(*read_results(path))
    print(to_json(summary) if as_json else format_table(summary))


def print_dry_run(out: str, plan: dict, as_json: bool) -> None:
    if as_json:
        print(json.dumps(plan, indent=2))
        return
    print(f"{out}: {plan['n_samples']} samples in the spec, {plan['stored']} stored, "
          f"{plan['to_compute']} to compute in {plan['tasks']} tasks of at most "
          f"{plan['samples_per_task']} on {plan['workers']} worker(s)")
    if plan["estimate"]:
        print(f"estimate: {plan['estimate']}")
    for w in plan["warnings"]:
        print(f"warning: {w}")


def run(args: argparse.Namespace) -> int:
    spec = load_spec(args.spec)
    run_spec = resolve_run(spec.run, cli_overrides(args), args.profiles)
    if args.dry_run:
        print_dry_run(args.output, dry_run(spec, args.output, run_spec), args.json)
        return 0
    outcome = run_sweep(spec, args.output, run_spec)
    if not args.json:
        print(f"{outcome.path}: "
              f"{outcome.computed} computed, {outcome.already_done} already stored, "
              f"{outcome.n_samples} in the spec ({outcome.elapsed:.1f} s)")
    print_summary(args.output, args.json)
    return 0
