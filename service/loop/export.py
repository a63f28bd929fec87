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

import gzip
import hashlib
import json
import os
from collections import Counter
from collections.abc import Mapping
from dataclasses import dataclass
from datetime import datetime
from pathlib import Path
from typing import IO, Any

import pandas as pd
import pyarrow as pa
import pyarrow.parquet as pq

from service.decisions.record import utc_now
from service.errors import DataError, NotFoundError
from service.loop.logged import LoggedDecisions, LogSource, iter_logged, open_log, utc_text

__all__ = [
    "EXPORT_KIND",
    "SIDECAR_SUFFIX",
    "ExportResult",
    "export_from_log",
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


def _frame(
    done: LoggedDecisions, types: Mapping[str, set[str]] | None = None
) -> tuple[pd.DataFrame, list[str]]:
    if types is None:
        features = done.features()
    else:  # the window's feature columns, typed alike in every chunk
        names = list(types)
        features = _typed(
            pd.DataFrame.from_records(done.feature_rows(names), columns=names), types
        )
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


def _typed(features: pd.DataFrame, types: Mapping[str, set[str]]) -> pd.DataFrame:
    """Numbers as float, true/false as nullable booleans, anything else as text."""
    out: dict[str, pd.Series[Any]] = {}
    for name in features.columns:
        kinds = types.get(str(name), set()) - {"null"}
        column = features[name]
        if kinds <= {"number"}:
            out[str(name)] = pd.to_numeric(column, errors="coerce").astype("float64")
        elif kinds == {"boolean"}:
            out[str(name)] = column.astype("boolean")
        else:
            text = column.map(str, na_action="ignore")  # missing values stay missing
            out[str(name)] = text.astype("string")
    return pd.DataFrame(out, index=features.index)


class _TableWriter:
    """Writes a table chunk by chunk to ``<path>.partial``, renamed into place on success,
    so a failed export leaves no half table: CSV (``.gz`` compressed) through one handle,
    Parquet through one writer with the first chunk's schema."""

    def __init__(self, path: Path) -> None:
        self.path = path
        self.partial = path.with_name(path.name + ".partial")
        self._parquet = path.name.lower().endswith(_PARQUET)
        self._handle: IO[str] | None = None
        self._writer: pq.ParquetWriter | None = None
        self._schema: pa.Schema | None = None
        path.parent.mkdir(parents=True, exist_ok=True)

    def write(self, frame: pd.DataFrame) -> None:
        if self._parquet:
            table = pa.Table.from_pandas(frame, schema=self._schema, preserve_index=False)
            if self._writer is None:
                self._schema = table.schema
                self._writer = pq.ParquetWriter(self.partial, table.schema)
            self._writer.write_table(table)
            return
        first = self._handle is None
        if self._handle is None:
            gz = self.path.name.lower().endswith(".gz")
            self._handle = (
                gzip.open(self.partial, "wt", encoding="utf-8", newline="")
                if gz
                else self.partial.open("w", encoding="utf-8", newline="")
            )
        frame.to_csv(self._handle, header=first, index=False)

    def close(self) -> None:
        self._finish()
        os.replace(self.partial, self.path)

    def abort(self) -> None:
        self._finish()
        self.partial.unlink(missing_ok=True)

    def _finish(self) -> None:
        if self._writer is not None:
            self._writer.close()
        if self._handle is not None:
            self._handle.close()


def _check_format(path: Path) -> None:
    if not path.name.lower().endswith(_PARQUET + _CSV):
        raise DataError(f"Cannot tell the format of {path}; name it .csv, .csv.gz or .parquet.")


def _no_outcome(campaign: str) -> DataError:
    return DataError(
        f"No decision of campaign {campaign!r} in this window has an outcome; "
        "post outcomes first (POST /v1/outcomes or `upshot outcomes import`)."
    )


def export_training_table(logged: LoggedDecisions, path: Path | str) -> ExportResult:
    """Write the decisions of ``logged`` that have an outcome as a CSV or Parquet table.

    Raises
    ------
    DataError
        No decision has an outcome, the file type is not CSV/Parquet, or a feature is
        named like an export column.
    """
    path = Path(path)
    _check_format(path)
    done = logged.with_outcomes()
    if not len(done):
        raise _no_outcome(logged.campaign)
    frame, features = _frame(done)
    writer = _TableWriter(path)
    try:
        writer.write(frame)
    except BaseException:
        writer.abort()
        raise
    writer.close()
    first, last = done.first_last()
    detail = done.detail
    assert detail is not None  # _frame checked it
    return _finish(
        path, logged.campaign, (logged.since, logged.until), (first, last),
        (len(done), len(logged) - len(done)), Counter(detail.model), set(detail.policy_hash),
        features,
    )  # fmt: skip


def export_from_log(
    log: LogSource,
    campaign: str,
    path: Path | str,
    *,
    since: datetime | str | None = None,
    until: datetime | str | None = None,
    chunk: int = 20_000,
) -> ExportResult:
    """:func:`export_training_table` straight from the store, streamed: the decisions of
    the window that have an outcome are read and written ``chunk`` at a time, so memory
    does not grow with the window. Feature columns and their types come from the store.
    """
    path = Path(path)
    _check_format(path)
    start, end = utc_text(since, "since"), utc_text(until, "until")
    store, owned = open_log(log)
    try:
        total, with_outcome = store.window_counts(campaign, since=start, until=end)
        if not total:
            raise NotFoundError(
                f"The log has no decisions of campaign {campaign!r} between "
                f"{start or 'the beginning'} and {end or 'now'}; check the campaign id and "
                "the window."
            )
        if not with_outcome:
            raise _no_outcome(campaign)
        types = store.feature_types(campaign, since=start, until=end, with_outcome=True)
        writer = _TableWriter(path)
        rows, models, policies = 0, Counter[str](), set[str]()
        first = last = None
        features: list[str] = list(types)
        try:
            parts = iter_logged(
                store, campaign, since=start, until=end, with_outcome=True, chunk=chunk
            )
            for part in parts:
                frame, features = _frame(part, types)
                writer.write(frame)
                detail = part.detail
                assert detail is not None
                rows += len(part)
                models.update(detail.model)
                policies.update(detail.policy_hash)
                first, last = first or part.first_at, part.last_at
        except BaseException:
            writer.abort()
            raise
        writer.close()
    finally:
        if owned:
            store.close()
    return _finish(
        path, campaign, (start, end), (first, last), (rows, total - rows), models, policies,
        features,
    )  # fmt: skip


def _finish(
    path: Path,
    campaign: str,
    window: tuple[str | None, str | None],
    span: tuple[str | None, str | None],
    counts: tuple[int, int],
    models: Counter[str],
    policies: set[str],
    features: list[str],
) -> ExportResult:
    provenance = {
        "kind": EXPORT_KIND,
        "campaign": campaign,
        "since": window[0],
        "until": window[1],
        "first_decision_at": span[0],
        "last_decision_at": span[1],
        "decisions": counts[0],
        "without_outcome": counts[1],
        "file": path.name,
        "sha256": _sha256(path),
        "exported_at": utc_now(),
        "model_versions": dict(sorted(models.items())),
        "policy_hashes": sorted(policies),
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
    return ExportResult(path, sidecar, counts[0], counts[1], provenance)


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
