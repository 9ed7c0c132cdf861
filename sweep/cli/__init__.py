"""The ``orderless`` command line: :func:`sweep.cli.main.main` and one module per command."""

from .main import main

__all__ = ["main"]
