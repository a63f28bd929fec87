"""A fingerprint of the training data: a content hash plus per-group counts and outcomes."""

from __future__ import annotations

import hashlib
from typing import Any

import numpy as np
import pandas as pd

from service.training.validate import TrainingData

__all__ = ["data_fingerprint"]


def _column_bytes(values: Any) -> tuple[bytes, bytes]:
    """(kind, content) of one column in a form independent of the file format."""
    series = pd.Series(values).reset_index(drop=True)
    numeric = pd.to_numeric(series, errors="coerce")
    if numeric.notna().sum() == series.notna().sum():
        array = np.array(numeric.to_numpy(dtype="<f8", na_value=np.nan), copy=True)
        array[np.isnan(array)] = np.nan  # one NaN bit pattern
        return b"number", array.tobytes()
    text = "\x1f".join("\x00" if pd.isna(v) else str(v) for v in series)
    return b"text", text.encode("utf-8")


def data_fingerprint(data: TrainingData) -> dict[str, Any]:
    """SHA-256 of the columns used (names, then values in row order), rows per group and
    the mean outcome per group (the response rate for a 0/1 outcome).

    Numbers are hashed as 64-bit floats and text as UTF-8, so the same table read from
    CSV or from Parquet has the same fingerprint.
    """
    digest = hashlib.sha256()
    columns: list[tuple[str, Any]] = [(name, data.X[name]) for name in data.X.columns]
    columns += [("__treatment__", data.treatment), ("__outcome__", data.y)]
    if data.sample_weight is not None:
        columns.append(("__weight__", data.sample_weight))
    if data.propensity is not None:
        columns += [(f"__propensity_{j}__", p) for j, p in enumerate(data.propensity.T)]
    for name, values in columns:
        kind, content = _column_bytes(values)
        digest.update(name.encode("utf-8") + b"\x1e" + kind + b"\x1e")
        digest.update(hashlib.sha256(content).digest())
    groups = {}
    for label in [data.control, *data.arms]:
        rows = data.treatment == label
        groups[str(label)] = {
            "label": label,
            "rows": int(rows.sum()),
            "outcome_mean": float(data.y[rows].mean()),
        }
    return {
        "sha256": digest.hexdigest(),
        "rows": len(data.y),
        "columns": data.columns,
        "ignored_columns": data.ignored,
        "groups": groups,
    }
