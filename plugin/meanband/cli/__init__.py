"""The ``meanband`` console command: subcommands are registered by feature modules."""

from __future__ import annotations

import argparse
import importlib
import os
import sys
from collections.abc import Sequence

#: Modules that each expose ``register(subparsers)``; a missing one is skipped. Each subcommand
#: sets ``handler=function(args) -> int`` with ``set_defaults``.
SUBCOMMAND_MODULES = ("meanband.cli.history", "meanband.cli.plan", "meanband.cli.report")


def build_parser() -> argparse.ArgumentParser:
    """The argument parser with every available subcommand."""
    parser = argparse.ArgumentParser(
        prog="meanband",
        description="Inspect meanband results: history, plans and reports.",
    )
    subparsers = parser.add_subparsers(dest="command", metavar="COMMAND")
    for name in SUBCOMMAND_MODULES:
        try:
            module = importlib.import_module(name)
        except ModuleNotFoundError as exc:
            if exc.name != name:
                raise
            continue
        module.register(subparsers)
    return parser


def main(argv: Sequence[str] | None = None) -> int:
    """Run the command; return its exit status (0 ok, 1 a finding, 2 a usage or file error)."""
    parser = build_parser()
    args = parser.parse_args(argv)
    handler = getattr(args, "handler", None)
    if handler is None:
        parser.print_help(sys.stderr)
        return 2
    try:
        status = int(handler(args) or 0)
        sys.stdout.flush()  # inside the try: a closed pipe shows here, not at interpreter exit
    except BrokenPipeError:
        # The reader went away (``meanband report ... | head``): end quietly, as Unix tools do.
        devnull = os.open(os.devnull, os.O_WRONLY)
        os.dup2(devnull, sys.stdout.fileno())
        return _CLOSED_PIPE
    return status


#: Exit status when the reader of standard output closed it early: 128 + SIGPIPE, as a shell
#: reports a tool that the signal ended.
_CLOSED_PIPE = 141


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
