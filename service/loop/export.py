"""A training table from the decision log, and the record of where it came from.

``upshot export`` writes one row per decision that has an outcome: the features as
scored, the action taken (``treatment``: ``none`` or an arm), the outcome, the exact
probability of that action and of every action (``p_<label>``), and ``ipw``, its inverse.
Training with ``ipw`` as the row weight reweights the log into a population where the
action no longer depends on the customer (inverse-propensity weighting), so the
randomized share (exploration and holdout) trains the next version without the bias of
the greedy choices. A sidecar file ``<table>.source.json`` records the campaign, window,
count and SHA-256 of the table; training from the table copies it into the new
version's manifest (key ``source_decisions``).
"""

from __future__ import annotations

import hashlib
import json
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import pandas as pd

from service.decisions.record import utc_now
from service.errors import DataError
from service.loop.logged import LoggedDecisions

__all__ = [
    "EXPORT_KIND",
    "SIDECAR_SUFFIX",
    "ExportResult",
    "export_training_table",
    "read_provenance",
    "sidecar_path",
    "training_arguments",
]

EXPORT_KIND = "upshot decision export"
SIDECAR_SUFFIX = ".source.json"
_FIXED = (
    "decision_id",
    "customer_id",
    "created_at",
    "model_version",
    "treatment",
    "outcome",
    "propensity",
    "ipw",
    "explored",
    "holdout",
)
_PARQUET = (".parquet", ".pq")
_CSV = (".csv", ".csv.gz")


@dataclass(frozen=True)
class ExportResult:
    """The table written, its sidecar, and what they hold."""

    path: Path
    sidecar: Path
    rows: int
    without_outcome: int
    provenance: dict[str, Any]


def sidecar_path(table: Path | str) -> Path:
    """Where the provenance of an exported table lives: ``<table>.source.json``."""
    table = Path(table)
    return table.with_name(table.name + SIDECAR_SUFFIX)


def _frame(done: LoggedDecisions) -> tuple[pd.DataFrame, list[str]]:
    features = done.features()
    reserved = set(_FIXED) | {f"p_{label}" for label in done.labels}
    clash = sorted(set(features.columns) & reserved)
    if clash:
        raise DataError(
            f"Feature(s) {clash} have the names of export columns; rename the feature(s) "
            "in the model before exporting this log."
        )
    detail = done.detail
    if detail is None:
        raise DataError("Export needs the decisions' detail; read them with detail=True.")
    front = pd.DataFrame(
        {
            "decision_id": detail.decision_id,
            "customer_id": detail.customer_id,
            "created_at": detail.created_at,
            "model_version": detail.model,
        }
    )
    rows = range(len(done))
    back = pd.DataFrame(
        {
            "treatment": [done.labels[a] for a in done.action],
            "outcome": done.outcome,
            "propensity": done.action_probs[rows, done.action],
            **{f"p_{label}": done.action_probs[:, j] for j, label in enumerate(done.labels)},
            "ipw": 1.0 / done.action_probs[rows, done.action],
            "explored": done.explored,
            "holdout": done.holdout,
        }
    )
    return pd.concat([front, features, back], axis=1), [str(c) for c in features.columns]


def export_training_table(logged: LoggedDecisions, path: Path | str) -> ExportResult:
    """Write the decisions of ``logged`` that have an outcome as a CSV or Parquet table.

    Raises
    ------
    DataError
        No decision has an outcome, the file type is not CSV/Parquet, or a feature is
        named like an export column.
    """
    path = Path(path)
    name = path.name.lower()
    if not name.endswith(_PARQUET + _CSV):
        raise DataError(f"Cannot tell the format of {path}; name it .csv, .csv.gz or .parquet.")
    done = logged.with_outcomes()
    if not len(done):
        raise DataError(
            f"No decision of campaign {logged.campaign!r} in this window has an outcome; "
            "post outcomes first (POST /v1/outcomes or `upshot outcomes import`)."
        )
    frame, features = _frame(done)
    path.parent.mkdir(parents=True, exist_ok=True)
    if name.endswith(_PARQUET):
        frame.to_parquet(path, index=False)
    else:
        frame.to_csv(path, index=False)
    first, last = done.first_last()
    provenance = {
        "kind": EXPORT_KIND,
        "campaign": logged.campaign,
        "since": logged.since,
        "until": logged.until,
        "first_decision_at": first,
        "last_decision_at": last,
        "decisions": len(done),
        "without_outcome": len(logged) - len(done),
        "file": path.name,
        "sha256": _sha256(path),
        "exported_at": utc_now(),
        "model_versions": frame["model_version"].value_counts().sort_index().to_dict(),
        "policy_hashes": sorted(set(done.detail.policy_hash if done.detail else [])),
        "training": {
            "treatment": "treatment",
            "outcome": "outcome",
            "control": "none",
            "sample_weight": "ipw",
            "features": features,
        },
    }
    sidecar = sidecar_path(path)
    sidecar.write_text(json.dumps(provenance, indent=2, sort_keys=True), encoding="utf-8")
    return ExportResult(path, sidecar, len(done), len(logged) - len(done), provenance)


def read_provenance(table: Path | str) -> dict[str, Any] | None:
    """The sidecar of an exported table, or None if the table has none.

    Raises :class:`DataError` when the sidecar does not describe this very file (its
    SHA-256 differs), so a table edited after export is not passed off as the log.
    """
    table = Path(table)
    sidecar = sidecar_path(table)
    if not sidecar.is_file():
        return None
    try:
        provenance = json.loads(sidecar.read_text(encoding="utf-8"))
    except (OSError, json.JSONDecodeError) as err:
        raise DataError(f"{sidecar} cannot be read as JSON ({err}); export again.") from err
    if not isinstance(provenance, dict) or provenance.get("kind") != EXPORT_KIND:
        raise DataError(f"{sidecar} is not an upshot export record; remove it or export again.")
    if provenance.get("sha256") != _sha256(table):
        raise DataError(
            f"{table} changed after it was exported (its SHA-256 differs from {sidecar}); "
            "export it again, or delete the sidecar to train from it as ordinary data."
        )
    return provenance


def training_arguments(provenance: dict[str, Any]) -> dict[str, Any]:
    """Keyword arguments of ``train_model`` for an exported table: columns and weights."""
    t = provenance["training"]
    return {
        "treatment": t["treatment"],
        "outcome": t["outcome"],
        "control": t["control"],
        "features": list(t["features"]),
        "sample_weight": t["sample_weight"],
    }


def _sha256(path: Path) -> str:
    digest = hashlib.sha256()
    with path.open("rb") as handle:
        for block in iter(lambda: handle.read(1 << 20), b""):
            digest.update(block)
    return digest.hexdigest()
