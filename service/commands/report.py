"""``upshot report``: rebuild the HTML report of a model version."""

from __future__ import annotations

import argparse
from typing import Any

from service.commands._common import add_models_dir, parse_cost, resolve_ref

__all__ = ["register"]


def register(subparsers: Any) -> None:
    """Add ``report`` to the ``upshot`` sub-commands."""
    parser = subparsers.add_parser(
        "report",
        help="rebuild the HTML report of a model version",
        description="Rebuild the report (HTML page, PNG plots, CSV tables) of a version from "
        "its verified out-of-fold predictions, optionally at another value and cost.",
    )
    parser.add_argument(
        "ref",
        metavar="NAME[:VERSION]",
        help="model, optionally with version (default: champion, else latest)",
    )
    parser.add_argument(
        "--value", type=float, help="value of one conversion (default: as trained)"
    )
    parser.add_argument(
        "--cost",
        type=parse_cost,
        metavar="C",
        help="contact cost, or per arm as email=0.1,call=2.5 (default: as trained)",
    )
    add_models_dir(parser)
    parser.set_defaults(handler=run)


def run(args: argparse.Namespace) -> int:
    """Rebuild the report and print its path."""
    from service.registry import REPORT_DIR, ModelRegistry
    from service.reporting import Economics, write_report

    registry = ModelRegistry(args.models_dir)
    name, version = resolve_ref(registry, args.ref)
    manifest = registry.verify(name, version)
    oof = registry.out_of_fold(name, version)
    trained = Economics.from_dict(manifest["economics"])
    economics = Economics.build(
        trained.value if args.value is None else args.value,
        trained.cost if args.cost is None else args.cost,
        manifest["arms"],
    )
    page = write_report(manifest, oof, registry.path(name, version) / REPORT_DIR, economics)
    print(f"report: {page}")
    return 0
