"""The ``orderless`` command line: one sub-command per module, registered here.

Each command module defines ``register(subparsers)`` which adds its parser and sets
``func`` (called with the parsed arguments, returning the exit code).  Errors the user can
fix are raised as :class:`sweep.errors.UserError` and printed as one line, exit code 2.
"""

from __future__ import annotations

import argparse
import importlib
import sys

from .errors import UserError

COMMAND_MODULES = ("sweep.cmd_check", "sweep.cmd_games", "sweep.cmd_run", "sweep.cmd_summary",
                   "sweep.cmd_plot", "sweep.cmd_demo", "sweep.cmd_verify", "sweep.cmd_remote")


def _version() -> str:
    from importlib import metadata
    try:
        return metadata.version("orderless")
    except metadata.PackageNotFoundError:  # pragma: no cover - a plain checkout
        return "unknown"


def build_parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(
        prog="orderless",
        description="Causal separability, robustness and causal inequalities of process matrices.",
    )
    parser.add_argument("--version", action="version", version=f"orderless {_version()}")
    sub = parser.add_subparsers(dest="command", required=True, metavar="COMMAND")
    for name in COMMAND_MODULES:
        importlib.import_module(name).register(sub)
    return parser


def main(argv: list[str] | None = None) -> int:
    parser = build_parser()
    args = parser.parse_args(argv)
    try:
        return int(args.func(args) or 0)
    except UserError as exc:
        print(f"orderless {args.command}: error: {exc}", file=sys.stderr)
        return 2
    except KeyboardInterrupt:
        print(f"orderless {args.command}: interrupted", file=sys.stderr)
        return 130


if __name__ == "__main__":
    sys.exit(main())
