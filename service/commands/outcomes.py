"""``upshot outcomes import``: record outcomes from a CSV or Parquet file."""

from __future__ import annotations

import argparse
from pathlib import Path
from typing import Any

import pandas as pd

from service.commands._loop import add_log
from service.errors import DataError

__all__ = ["register"]

_DESCRIPTION = """\
Record the observed outcome of logged decisions, by decision_id. The file needs a
decision id column and an outcome column (1/0 for a response, or an amount), and may
have an observation time (ISO 8601 with a UTC offset). Post outcomes for every decision
whose outcome is known, contacted or not: a non-response is an outcome of 0.
Idempotent: outcomes already recorded with the same value change nothing; a different
value for a decision that has one refuses the whole file (nothing is stored). Ids that
match no logged decision are reported.
"""


def register(subparsers: Any) -> None:
    """Add ``outcomes`` and its action ``import``."""
    parser = subparsers.add_parser(
        "outcomes", help="record outcomes of logged decisions", description=_DESCRIPTION
    )
    actions = parser.add_subparsers(title="actions", metavar="ACTION", required=True)
    imp = actions.add_parser(
        "import", help="record outcomes from a file", description=_DESCRIPTION
    )
    imp.add_argument("file", type=Path, help="outcomes (.csv, .tsv or .parquet)")
    imp.add_argument("--id-column", default="decision_id", help="(default: decision_id)")
    imp.add_argument("--outcome-column", default="outcome", help="(default: outcome)")
    imp.add_argument(
        "--time-column", default="observed_at", help="observation time, optional (observed_at)"
    )
    add_log(imp)
    imp.set_defaults(handler=run_import)


def read_outcomes(path: Path, id_column: str) -> pd.DataFrame:
    """Read an outcome file, keeping decision ids as text."""
    if not path.is_file():
        raise DataError(f"Outcome file {path} does not exist; check the path.")
    name = path.name.lower()
    try:
        if name.endswith((".parquet", ".pq")):
            return pd.read_parquet(path)
        sep = "\t" if name.endswith((".tsv", ".tsv.gz")) else ","
        return pd.read_csv(path, sep=sep, dtype={id_column: str})
    except (ValueError, OSError, pd.errors.ParserError) as err:
        raise DataError(f"Cannot read {path} ({err}); give a valid CSV or Parquet file.") from err


def run_import(args: argparse.Namespace) -> int:
    """Record the file's outcomes in one transaction and print what happened."""
    from service.decisions.outcomes import OutcomeStore, outcomes_from_rows

    frame = read_outcomes(args.file, args.id_column)
    for column in (args.id_column, args.outcome_column):
        if column not in frame:
            raise DataError(
                f"Column {column!r} is not in {args.file}; its columns are {list(frame.columns)}. "
                "Name the columns with --id-column / --outcome-column."
            )
    rows = [
        {
            "decision_id": d,
            "outcome": y,
            "observed_at": t,
        }
        for d, y, t in zip(
            frame[args.id_column],
            frame[args.outcome_column],
            frame[args.time_column] if args.time_column in frame else [None] * len(frame),
            strict=True,
        )
    ]
    outcomes = outcomes_from_rows(rows, where=str(args.file))
    receipt = OutcomeStore.open(args.log).record(outcomes)
    print(
        f"{len(receipt.recorded)} outcome(s) recorded, {len(receipt.unchanged)} already "
        f"recorded (unchanged), {len(receipt.unknown)} with an unknown decision id"
    )
    if receipt.unknown:
        shown = ", ".join(receipt.unknown[:10])
        more = f" and {len(receipt.unknown) - 10} more" if len(receipt.unknown) > 10 else ""
        print(
            f"WARNING: no logged decision has the id(s) {shown}{more}; nothing was stored for them"
        )
    return 0
