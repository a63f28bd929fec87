"""``upshot score``: decide for every customer of a CSV or Parquet file, log, write a file."""

from __future__ import annotations

import argparse
import os
import sys
from collections.abc import Callable
from pathlib import Path
from typing import Any

from service.commands._common import add_models_dir
from service.commands._loop import add_campaigns

__all__ = ["register"]

_DESCRIPTION = """\
Decide for every customer of an audience file (CSV, or Parquet: a file or a directory of
parts) exactly as the service would: the same decisions, decision ids and propensities
as POST /v1/score/batch (or, with --rank, POST /v1/rank) for the same customers. The file
holds the customer id column and the model's features (and optionally a "value" column).
Every decision is committed to the decision log before the output (Parquet or CSV, by
extension) is renamed into place; a failed run leaves no output and, for bad input, logs
nothing. Decisions are estimates, not advice: honour opt-outs and the contact law where
each customer lives.
"""


def register(subparsers: Any) -> None:
    """Add ``score``."""
    parser = subparsers.add_parser(
        "score", help="decide for an audience file (CSV/Parquet)", description=_DESCRIPTION
    )
    parser.add_argument("data", type=Path, metavar="DATA", help="CSV or Parquet audience")
    parser.add_argument("--campaign", required=True, help="campaign id in the campaign file")
    parser.add_argument(
        "--out", type=Path, required=True, metavar="FILE", help="output (.parquet or .csv)"
    )
    parser.add_argument(
        "--rank", action="store_true", help="one ranked contact list cut at capacity/budget"
    )
    parser.add_argument("--capacity", type=int, help="most rows on the ranked list")
    parser.add_argument("--budget", type=float, help="most summed contact cost of the list")
    parser.add_argument(
        "--id-column", default="customer_id", help="customer id column (default customer_id)"
    )
    add_campaigns(parser)
    add_models_dir(parser)
    parser.add_argument(
        "--decision-log",
        default=os.environ.get("UPSHOT_DECISION_LOG", "var/decisions.sqlite3"),
        help="decision log (default: $UPSHOT_DECISION_LOG or var/decisions.sqlite3)",
    )
    parser.add_argument(
        "--dask",
        metavar="ADDRESS",
        help="run the parts on a Dask scheduler (tcp://host:8786), or 'local' for a "
        "LocalCluster of --workers processes on this machine",
    )
    parser.add_argument(
        "--workers", type=int, default=2, help="processes of --dask local (default 2)"
    )
    parser.add_argument("--quiet", action="store_true", help="no progress bar")
    parser.set_defaults(handler=run)


def run(args: argparse.Namespace) -> int:
    """Score the file and print a one-line summary."""
    from service.batch import Audience, output_format, score_file
    from service.decisions import DecisionLog
    from service.errors import DataError
    from service.policy import load_campaigns
    from service.registry import ModelRegistry
    from service.scoring import bind_campaigns

    output_format(args.out)  # refuse a bad extension before any work
    if not args.rank and (args.capacity is not None or args.budget is not None):
        raise DataError("--capacity and --budget cut a ranked list; add --rank.")
    campaigns = load_campaigns(args.campaigns)
    if args.campaign in campaigns:
        campaigns = {args.campaign: campaigns[args.campaign]}
    catalog = bind_campaigns(ModelRegistry(args.models_dir), campaigns)
    bound = catalog.get(args.campaign)
    audience = Audience(args.data, id_column=args.id_column)
    with DecisionLog.open(args.decision_log) as log, _runner(args, bound, audience) as runner:
        summary = score_file(
            bound, audience, args.out, log, rank=args.rank, capacity=args.capacity,
            budget=args.budget, runner=runner, progress=None if args.quiet else _bar,
        )  # fmt: skip
    from service.decisions.location import redact

    listed = "" if summary.listed is None else f", {summary.listed:,} on the list"
    print(
        f"decided {summary.rows:,} customers of {args.campaign} with "
        f"{bound.bundle.name}:{bound.bundle.version}{listed}; {summary.logged:,} decisions "
        f"logged to {redact(args.decision_log)}; wrote {summary.out} in {summary.seconds:.1f} s"
    )
    return 0


def _runner(args: argparse.Namespace, bound: Any, audience: Any) -> Any:
    from contextlib import nullcontext

    if args.dask is None:
        return nullcontext(None)
    from service.batch.cluster import dask_runner

    return dask_runner(args.dask, bound, audience, workers=args.workers)


def _bar(label: str, total: int | None) -> Callable[[int], None]:
    from tqdm import tqdm

    bar = tqdm(total=total, desc=label, unit="row", unit_scale=True, file=sys.stderr)

    def advance(n: int) -> None:
        bar.update(n)
        if total is not None and bar.n >= total:
            bar.close()

    return advance
