"""The ``upshot`` command line: a thin dispatcher over the modules in ``service/commands``.

Each module listed in :data:`COMMANDS` has ``register(subparsers)``, which adds its
sub-command and sets ``handler`` (a function ``args -> exit code``) as a default. Errors
upshot raises on purpose print as one line on standard error with exit code 1; usage
errors exit with 2.
"""

from __future__ import annotations

import argparse
import importlib
import logging
import sys
from collections.abc import Sequence

from service import __version__
from service.errors import UpshotError

__all__ = ["COMMANDS", "build_parser", "main"]

COMMANDS: tuple[str, ...] = (
    "serve",
    "keys",
    "train",
    "models",
    "report",
    "segments",
    "outcomes",
    "lift",
    "replay",
    "export",
    "drift",
    "plan",
    "demo_data",
    "score",
    "log",
)
"""Modules of ``service.commands`` that provide sub-commands, in help order."""


def build_parser() -> argparse.ArgumentParser:
    """The full argument parser with every registered sub-command."""
    parser = argparse.ArgumentParser(
        prog="upshot",
        description="Learn the incremental effect of a contact (uplift) from randomized "
        "campaigns, keep versioned models, and serve contact decisions.",
    )
    parser.add_argument("--version", action="version", version=f"upshot {__version__}")
    subparsers = parser.add_subparsers(title="commands", metavar="COMMAND")
    for name in COMMANDS:
        importlib.import_module(f"service.commands.{name}").register(subparsers)
    return parser


def main(argv: Sequence[str] | None = None) -> int:
    """Run ``upshot`` with ``argv`` (default: the process arguments); return the exit code."""
    parser = build_parser()
    args = parser.parse_args(argv)
    handler = getattr(args, "handler", None)
    if handler is None:
        parser.print_help(sys.stderr)
        return 2
    logging.basicConfig(level=logging.WARNING, format="%(levelname)s %(name)s: %(message)s")
    try:
        code: int = handler(args)
    except UpshotError as err:
        print(f"upshot: error: {err}", file=sys.stderr)
        return 1
    except KeyboardInterrupt:
        print("upshot: interrupted", file=sys.stderr)
        return 130
    return code


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
