"""The ``orderless`` command line: one sub-command per module, registered here.

Each command module defines ``register(subparsers)`` which adds its parser and sets
``func`` (called with the parsed arguments, returning the exit code).  Errors the user can
fix are raised as :class:`sweep.errors.UserError` and printed as one line, exit code 2;
faults of the environment (:class:`sweep.errors.EnvironmentFault`) likewise, exit code 3.
Ctrl-C exits 130, SIGTERM 143 and SIGHUP 129, each with one line.  Output piped into a
program that stops reading (``| head``) ends quietly (exit 141, as if killed by SIGPIPE).
"""

from __future__ import annotations

import argparse
import importlib
import os
import sys

# One BLAS/OpenMP thread per process unless the user sets more: the solves are many small
# dense operations, for which threads cost more than they give (an in-process tripartite
# solve took 2.6 s with one OpenBLAS thread against 15 s with its default on a loaded 2-core
# machine), and the workers the tool starts run one thread each, so a serial run or `check`
# computes like them.  Set before numpy is imported (by the command modules, below).
for _name in ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ.setdefault(_name, "1")

from sweep.errors import RunStopped, UserError  # noqa: E402 - after the thread settings

COMMAND_MODULES = ("sweep.cli.check", "sweep.cli.games", "sweep.cli.run", "sweep.cli.summary",
                   "sweep.cli.status", "sweep.cli.snapshot", "sweep.cli.plot", "sweep.cli.demo",
                   "sweep.cli.verify", "sweep.cli.submit", "sweep.cli.fetch", "sweep.cli.cancel")


def _version() -> str:
    from importlib import metadata
    try:
        return metadata.version("orderless")
    except metadata.PackageNotFoundError:  # pragma: no cover - a plain checkout
        return "unknown"


def build_parser(command: str | None = None) -> argparse.ArgumentParser:
    """The parser; with ``command`` given only that command's module is imported (the others
    get bare entries), so a light command such as ``status`` starts fast."""
    parser = argparse.ArgumentParser(
        prog="orderless",
        description="Causal separability, robustness and causal inequalities of process matrices.",
    )
    parser.add_argument("--version", action="version", version=f"orderless {_version()}")
    sub = parser.add_subparsers(dest="command", required=True, metavar="COMMAND")
    for module in COMMAND_MODULES:
        name = module.removeprefix("sweep.cli.")
        if command is None or name == command:
            importlib.import_module(module).register(sub)
        else:
            sub.add_parser(name)
    return parser


def main(argv: list[str] | None = None) -> int:
    argv = sys.argv[1:] if argv is None else list(argv)
    first = next((a for a in argv if not a.startswith("-")), None)
    known = {m.removeprefix("sweep.cli.") for m in COMMAND_MODULES}
    parser = build_parser(first if first in known and "-h" not in argv[:1] else None)
    args = parser.parse_args(argv)
    try:
        code = int(args.func(args) or 0)
        sys.stdout.flush()
        return code
    except BrokenPipeError:
        _silence_stdout()
        return 141
    except UserError as exc:
        print(f"orderless {args.command}: error: {exc}", file=sys.stderr)
        return exc.exit_code
    except KeyboardInterrupt as exc:
        print(f"orderless {args.command}: {exc or 'interrupted'}", file=sys.stderr)
        return 130
    except RunStopped as exc:
        print(f"orderless {args.command}: {getattr(exc, 'message', exc.name)}", file=sys.stderr)
        return exc.exit_code


def _silence_stdout() -> None:
    """After a broken pipe, point stdout at /dev/null so the interpreter's final flush does
    not raise again (Python documentation, "Note on SIGPIPE")."""
    devnull = os.open(os.devnull, os.O_WRONLY)
    os.dup2(devnull, sys.stdout.fileno())


if __name__ == "__main__":
    sys.exit(main())
