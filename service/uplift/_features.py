"""Turn a feature table into the numeric matrix every base learner reads.

Numeric columns pass through as float (NaN kept: the default gradient-boosted trees
handle missing values natively, the linear option imputes). Text, categorical and
boolean columns become integer codes with unknown or missing values as NaN, and a mask
says which columns are categorical.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np
import pandas as pd

from service.errors import DataError

__all__ = ["FeatureEncoder", "FeatureSpec", "as_frame"]

# Histogram-based trees accept at most 255 bins per feature, one of them for missing.
MAX_CATEGORIES = 250


@dataclass(frozen=True)
class FeatureSpec:
    """What training saw of one feature."""

    name: str
    kind: str  # "numeric" or "categorical"
    categories: tuple[str, ...] = ()
    minimum: float | None = None
    maximum: float | None = None
    missing_share: float = 0.0

    def to_dict(self) -> dict[str, Any]:
        return {
            "name": self.name,
            "kind": self.kind,
            "categories": list(self.categories),
            "minimum": self.minimum,
            "maximum": self.maximum,
            "missing_share": self.missing_share,
        }


def as_frame(X: Any) -> pd.DataFrame:
    """Return ``X`` as a DataFrame; arrays get the column names ``x0, x1, ...``."""
    if isinstance(X, pd.DataFrame):
        return X
    array = np.asarray(X)
    if array.ndim != 2:
        raise DataError(
            f"Features must be a 2-D table, got an array with {array.ndim} dimension(s); "
            "pass a DataFrame or a 2-D array with one row per customer."
        )
    return pd.DataFrame(array, columns=[f"x{i}" for i in range(array.shape[1])])


def _is_categorical(series: pd.Series) -> bool:
    return not pd.api.types.is_numeric_dtype(series) or pd.api.types.is_bool_dtype(series)


def _spec(name: str, series: pd.Series) -> FeatureSpec:
    missing = float(series.isna().mean()) if len(series) else 0.0
    if _is_categorical(series):
        counts = series.dropna().astype(str).value_counts(sort=True)
        kept = sorted(counts.index[:MAX_CATEGORIES].tolist())
        return FeatureSpec(name, "categorical", tuple(kept), missing_share=missing)
    values = series.to_numpy(dtype=float, na_value=np.nan)
    finite = values[np.isfinite(values)]
    if len(finite) != int((~np.isnan(values)).sum()):
        raise DataError(
            f"Feature column {name!r} contains infinite values; replace them with a finite "
            "number or leave the cell empty (missing)."
        )
    low = float(finite.min()) if len(finite) else None
    high = float(finite.max()) if len(finite) else None
    return FeatureSpec(name, "numeric", minimum=low, maximum=high, missing_share=missing)


class FeatureEncoder:
    """Fitted column schema plus the table-to-matrix transform.

    Categories beyond the :data:`MAX_CATEGORIES` most frequent ones are treated as
    missing, as are categories never seen in training.
    """

    def __init__(self, specs: list[FeatureSpec]) -> None:
        self.specs = specs
        self.names = [s.name for s in specs]
        self.categorical_mask = np.array([s.kind == "categorical" for s in specs], dtype=bool)

    @classmethod
    def fit(cls, frame: pd.DataFrame) -> FeatureEncoder:
        if frame.shape[1] == 0:
            raise DataError("No feature columns were given; pass at least one feature column.")
        names = [str(c) for c in frame.columns]
        if len(set(names)) != len(names):
            raise DataError("Feature column names must be unique; rename the duplicate columns.")
        return cls([_spec(str(c), frame[c]) for c in frame.columns])

    def transform(self, X: Any) -> np.ndarray:
        """Encode ``X`` (a DataFrame with the training columns, or a 2-D array)."""
        frame = as_frame(X)
        if not isinstance(X, pd.DataFrame) and frame.shape[1] == len(self.names):
            frame.columns = pd.Index(self.names)
        missing = [n for n in self.names if n not in frame.columns]
        if missing:
            raise DataError(
                f"Feature column(s) {missing} are missing; the model was trained on "
                f"{self.names}. Add the missing columns (empty values are allowed)."
            )
        out = np.empty((len(frame), len(self.names)), dtype=float)
        for j, spec in enumerate(self.specs):
            column = frame[spec.name]
            if spec.kind == "categorical":
                out[:, j] = _codes(column, spec.categories)
            else:
                out[:, j] = _numeric(spec.name, column)
        return out


def _codes(column: pd.Series, categories: tuple[str, ...]) -> np.ndarray:
    """Category codes as floats; missing and unseen categories become NaN."""
    present = column.notna().to_numpy()
    out = np.full(len(column), np.nan)
    labels = column[present].astype(str)
    codes = pd.Index(categories).get_indexer(pd.Index(labels)).astype(float)
    codes[codes < 0] = np.nan
    out[present] = codes
    return out


def _numeric(name: str, column: pd.Series) -> np.ndarray:
    if pd.api.types.is_numeric_dtype(column) and not pd.api.types.is_bool_dtype(column):
        values = column.to_numpy(dtype=float, na_value=np.nan)
    else:
        converted = pd.to_numeric(column, errors="coerce")
        bad = converted.isna() & column.notna()
        if bad.any():
            example = column[bad].iloc[0]
            raise DataError(
                f"Feature column {name!r} is numeric in training but holds {example!r}; "
                "send a number or leave the value empty."
            )
        values = converted.to_numpy(dtype=float, na_value=np.nan)
    if np.isinf(values).any():
        raise DataError(
            f"Feature column {name!r} holds an infinite value; send a finite number or "
            "leave the value empty (missing)."
        )
    return values
