"""The ``meanband`` console command; feature modules add their subcommands here."""

from __future__ import annotations

import argparse
import importlib
import sys
from collections.abc import Sequence

__all__ = ["FEATURES", "build_parser", "main"]

#: Modules that each expose ``register(subparsers)`` and add their subcommands. A subcommand
#: sets ``func`` (``args -> exit code``) with ``set_defaults``.
FEATURES = ("meanband.history_cli",)


def build_parser() -> argparse.ArgumentParser:
    """The full parser, with every feature's subcommands."""
    from meanband import __version__

    parser = argparse.ArgumentParser(
        prog="meanband", description="Work with meanband's stored runs and results."
    )
    parser.add_argument("--version", action="version", version=f"meanband {__version__}")
    subparsers = parser.add_subparsers(dest="command", metavar="COMMAND")
    for name in FEATURES:
        importlib.import_module(name).register(subparsers)
    return parser


def main(argv: Sequence[str] | None = None) -> int:
    """Run the command; returns the exit status (2 for usage errors)."""
    parser = build_parser()
    args = parser.parse_args(argv)
    func = getattr(args, "func", None)
    if func is None:
        parser.print_help(sys.stderr)
        return 2
    return int(func(args))
