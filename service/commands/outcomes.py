"""``upshot outcomes import|correct|history``: record outcomes from a file, correct one
explicitly (who, when, why), show a decision's outcome and its corrections."""

from __future__ import annotations

import argparse
from pathlib import Path
from typing import Any

import pandas as pd

from service.commands._common import add_models_dir, default_actor
from service.commands._loop import add_log, print_json
from service.errors import DataError

__all__ = ["register"]

_DESCRIPTION = """\
Record the observed outcome of logged decisions, by decision_id. The file needs a
decision id column and an outcome column (1/0 for a response, or an amount), and may
have an observation time (ISO 8601 with a UTC offset). Post outcomes for every decision
whose outcome is known, contacted or not: a non-response is an outcome of 0.
Idempotent: outcomes already recorded with the same value change nothing; a different
value for a decision that has one refuses the whole file (nothing is stored); so does an
outcome the decision's model cannot have (a binary model takes only 0 and 1; amounts
stay within +/-1e9). Ids that match no logged decision are reported.
"""

_CORRECT = """\
Correct the recorded outcome of one decision. The previous value is kept in the store
with who corrected it, when and why (`upshot outcomes history ID` shows them); nothing
is ever overwritten silently. The value is checked like any outcome.
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
    add_models_dir(imp)
    imp.set_defaults(handler=run_import)

    fix = actions.add_parser("correct", help="correct one recorded outcome", description=_CORRECT)
    fix.add_argument("decision_id", help="the decision whose outcome was wrong")
    fix.add_argument("outcome", type=float, help="the corrected outcome (1/0 or an amount)")
    fix.add_argument("--reason", required=True, help="why the recorded outcome was wrong")
    fix.add_argument("--observed-at", help="when it was observed (ISO 8601 with offset)")
    fix.add_argument("--actor", default=None, help="who corrects it (default: the OS user)")
    add_log(fix)
    add_models_dir(fix)
    fix.set_defaults(handler=run_correct)

    show = actions.add_parser("history", help="a decision's outcome and its corrections")
    show.add_argument("decision_id")
    add_log(show)
    show.set_defaults(handler=run_history)


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
    from service.decisions import DecisionLog, outcomes_from_rows
    from service.loop.kinds import registry_outcome_kinds
    from service.registry import ModelRegistry

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
    kinds = registry_outcome_kinds(ModelRegistry(args.models_dir))
    with DecisionLog.open(args.log, create=False) as log:
        receipt = log.record_outcomes(outcomes, kinds)
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


def run_correct(args: argparse.Namespace) -> int:
    """Correct one outcome and print what changed."""
    from service.decisions import DecisionLog, parse_outcome
    from service.loop.kinds import registry_outcome_kinds
    from service.registry import ModelRegistry

    fixed = parse_outcome(args.decision_id, args.outcome, args.observed_at, where="correction")
    kinds = registry_outcome_kinds(ModelRegistry(args.models_dir))
    with DecisionLog.open(args.log, create=False) as log:
        done = log.correct_outcome(
            fixed, actor=args.actor or default_actor(), reason=args.reason, kinds=kinds
        )
    print(
        f"outcome of decision {done.decision_id} corrected from {done.previous.outcome:g} to "
        f"{done.outcome.outcome:g} by {done.actor} at {done.corrected_at}"
    )
    return 0


def run_history(args: argparse.Namespace) -> int:
    """Print a decision's current outcome and every correction of it, as JSON."""
    from service.decisions import DecisionLog

    with DecisionLog.open(args.log, create=False) as log:
        current = log.outcome(args.decision_id)
        fixes = log.corrections(args.decision_id)
    print_json(
        {
            "decision_id": args.decision_id,
            "outcome": current.to_dict() if current else None,
            "corrections": [c.to_dict() for c in fixes],
        }
    )
    return 0
