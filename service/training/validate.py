"""Check a campaign table before any model is fitted and say exactly what to fix."""

from __future__ import annotations

import difflib
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np
import pandas as pd

from service.errors import DataError

__all__ = ["TrainingData", "prepare_training_data"]

# Common practice, no source: a column whose non-missing values are mostly numbers is a
# numeric column with typing errors, not a set of categories.
_NUMERIC_MAJORITY = 0.5
# Each training fold must keep the learners' minimum of 20 rows per arm.
MIN_ARM_ROWS = 20
_CONTROL_NAMES = (0, "0", "control", "none", False)

Propensity = str | Mapping[Any, str] | None


@dataclass(frozen=True, eq=False)
class TrainingData:
    """A validated campaign: features, outcome, treatment labels and optional weights."""

    X: pd.DataFrame
    y: np.ndarray
    treatment: np.ndarray
    control: Any
    arms: list[Any]
    outcome_type: str
    sample_weight: np.ndarray | None
    propensity: np.ndarray | None
    columns: dict[str, Any]  # role -> column name(s)
    ignored: list[str]


def _plain(value: Any) -> Any:
    return value.item() if isinstance(value, np.generic) else value


def _row(series: pd.Series, mask: pd.Series) -> str:
    """Where the first True in ``mask`` is, for messages (1-based, header not counted)."""
    return f"row {int(np.flatnonzero(mask.to_numpy())[0]) + 1} after the header"


def _require(frame: pd.DataFrame, column: str, role: str, source: str) -> None:
    if column in frame.columns:
        return
    available = [str(c) for c in frame.columns]
    close = difflib.get_close_matches(column, available, n=1)
    hint = f" Did you mean {close[0]!r}?" if close else ""
    raise DataError(
        f"Column {column!r} ({role}) is not in {source}; the columns are: "
        f"{', '.join(available)}.{hint}"
    )


def _looks_like_id(series: pd.Series) -> bool:
    if pd.api.types.is_numeric_dtype(series) or len(series) < 20:
        return False
    present = series.dropna()
    return len(present) == len(series) and present.nunique() == len(present)


def _features(
    frame: pd.DataFrame, features: Sequence[str] | None, reserved: list[str], source: str
) -> tuple[list[str], list[str]]:
    if features is not None:
        chosen = list(features)
        for column in chosen:
            _require(frame, column, "a feature", source)
            if column in reserved:
                raise DataError(
                    f"Column {column!r} is the treatment, outcome, weight or propensity, so "
                    "it cannot also be a feature; drop it from the feature list."
                )
        if not chosen:
            raise DataError("The feature list is empty; name at least one feature column.")
        return chosen, []
    rest = [str(c) for c in frame.columns if str(c) not in reserved]
    ignored = [c for c in rest if _looks_like_id(frame[c])]
    chosen = [c for c in rest if c not in ignored]
    if not chosen:
        raise DataError(
            f"{source} has no feature columns besides {reserved + ignored}; add the customer "
            "attributes the model should learn from."
        )
    return chosen, ignored


def _numeric_feature(name: str, series: pd.Series) -> pd.Series:
    """Return ``series`` as numbers if it is a numeric column, else unchanged.

    Raises when most values are numbers but some are text (a typing error).
    """
    if pd.api.types.is_numeric_dtype(series) or pd.api.types.is_bool_dtype(series):
        return series
    present = series.notna()
    if not present.any():
        return series
    parsed = pd.to_numeric(series.where(present), errors="coerce")
    text = present & parsed.isna()
    share = 1.0 - text.sum() / present.sum()
    if not text.any():
        return parsed.astype(float)
    if share >= _NUMERIC_MAJORITY:
        raise DataError(
            f"Column {name!r} holds numbers but also text in {int(text.sum())} row(s), e.g. "
            f"{series[text].iloc[0]!r} in {_row(series, text)}; correct those "
            "cells or leave them empty (empty means missing)."
        )
    return series


def _treatment(series: pd.Series, column: str, control: Any) -> tuple[np.ndarray, Any, list[Any]]:
    missing = series.isna()
    if missing.any():
        raise DataError(
            f"Treatment column {column!r} is empty in {int(missing.sum())} row(s) (first: "
            f"{_row(series, missing)}); fill in the group each customer was in or "
            "drop those rows."
        )
    values = np.array([_plain(v) for v in series.to_numpy(dtype=object)], dtype=object)
    if all(isinstance(v, float) and v.is_integer() for v in values):
        # 0.0/1.0 read from a file with empty cells are the labels 0 and 1.
        values = np.array([int(v) for v in values], dtype=object)
    labels = sorted(set(values.tolist()), key=str)
    if len(labels) < 2:
        raise DataError(
            f"Treatment column {column!r} holds only one group ({labels[0]!r}); uplift is "
            "learned by comparing contacted customers with a randomized control group, so "
            "the data must contain both."
        )
    resolved = _control(labels, column, control)
    arms = [label for label in labels if label != resolved]
    return values, resolved, arms


def _control(labels: list[Any], column: str, control: Any) -> Any:
    if control is None:
        for candidate in _CONTROL_NAMES:
            for label in labels:
                if type(label) is type(candidate) and label == candidate:
                    return label
        raise DataError(
            f"Cannot tell which group in {column!r} is the control among {labels}; name it "
            "with --control LABEL (control=... in Python)."
        )
    if control in labels:
        return control
    matches = [label for label in labels if str(label) == str(control)]
    if len(matches) == 1:
        return matches[0]
    raise DataError(
        f"The control label {control!r} does not occur in {column!r}; its groups are "
        f"{labels}. Pass one of them."
    )


def _outcome(series: pd.Series, column: str) -> tuple[np.ndarray, str]:
    if pd.api.types.is_bool_dtype(series):
        series = series.astype(float)
    missing = series.isna()
    if missing.any():
        raise DataError(
            f"Outcome column {column!r} is empty in {int(missing.sum())} row(s) (first: "
            f"{_row(series, missing)}); drop those rows or record the outcome."
        )
    parsed = pd.to_numeric(series, errors="coerce")
    text = parsed.isna()
    if text.any():
        raise DataError(
            f"Outcome column {column!r} holds text, e.g. {series[text].iloc[0]!r} in "
            f"{_row(series, text)}; the outcome must be a number: 1/0 for a response, or an "
            "amount. Recode it."
        )
    values = parsed.to_numpy(dtype=float)
    if not np.isfinite(values).all():
        raise DataError(f"Outcome column {column!r} holds infinite values; replace them.")
    binary = set(np.unique(values).tolist()) <= {0.0, 1.0}
    return values, "binary" if binary else "continuous"


def _check_arms(
    y: np.ndarray, treatment: np.ndarray, labels: list[Any], kind: str, n_splits: int
) -> None:
    needed = int(np.ceil(MIN_ARM_ROWS * n_splits / max(n_splits - 1, 1)))
    for label in labels:
        rows = treatment == label
        if rows.sum() < needed:
            raise DataError(
                f"Group {label!r} has {int(rows.sum())} row(s); training needs at least "
                f"{needed} per group ({MIN_ARM_ROWS} in each cross-validation training "
                "fold). Collect more data for it or drop the group."
            )
        if kind == "binary" and len(np.unique(y[rows])) < 2:
            raise DataError(
                f"In group {label!r} the outcome is always {y[rows][0]:g}; a response model "
                "needs both responders and non-responders in every group."
            )


def _weights(frame: pd.DataFrame, column: str | None) -> np.ndarray | None:
    if column is None:
        return None
    parsed: np.ndarray = pd.to_numeric(frame[column], errors="coerce").to_numpy(dtype=float)
    if not np.isfinite(parsed).all() or (parsed < 0).any() or parsed.sum() <= 0:
        raise DataError(
            f"Weight column {column!r} must hold a finite, non-negative number in every row "
            "with a positive total; fix the empty, text or negative cells."
        )
    return parsed


def _propensity(
    frame: pd.DataFrame,
    propensity: Propensity,
    treatment: np.ndarray,
    labels: list[Any],
    source: str,
) -> tuple[np.ndarray | None, Any]:
    if propensity is None:
        return None, None
    if isinstance(propensity, str):
        _require(frame, propensity, "the propensity", source)
        if len(labels) != 2:
            raise DataError(
                f"A single propensity column {propensity!r} cannot describe {len(labels) - 1} "
                "contact arms; give one column per group, e.g. "
                "--propensity none=p_none,email=p_email,call=p_call."
            )
        received = _probability(frame, propensity)
        treated = treatment == labels[1]
        p_treated = np.where(treated, received, 1.0 - received)
        return np.column_stack([1.0 - p_treated, p_treated]), propensity
    by_label = {str(k): v for k, v in propensity.items()}
    missing = [str(label) for label in labels if str(label) not in by_label]
    if missing:
        raise DataError(
            f"The propensity columns name no column for group(s) {missing}; give one column "
            "per group, control included."
        )
    for column in by_label.values():
        _require(frame, column, "a propensity", source)
    matrix = np.column_stack([_probability(frame, by_label[str(label)]) for label in labels])
    return matrix, {str(k): v for k, v in by_label.items()}


def _probability(frame: pd.DataFrame, column: str) -> np.ndarray:
    values: np.ndarray = pd.to_numeric(frame[column], errors="coerce").to_numpy(dtype=float)
    if not np.isfinite(values).all() or (values <= 0).any() or (values >= 1).any():
        raise DataError(
            f"Propensity column {column!r} must hold a probability strictly between 0 and 1 "
            "in every row; fix the empty, text or out-of-range cells."
        )
    return values


def prepare_training_data(
    frame: pd.DataFrame,
    *,
    treatment: str,
    outcome: str,
    control: Any = None,
    features: Sequence[str] | None = None,
    sample_weight: str | None = None,
    propensity: Propensity = None,
    n_splits: int = 5,
    source: str = "the data",
) -> TrainingData:
    """Validate a campaign table and split it into the pieces a learner takes.

    Parameters
    ----------
    frame : DataFrame
        One row per customer.
    treatment, outcome : str
        Column names of the group label and of the observed outcome.
    control : label, optional
        The control group's label; ``0``, ``"0"``, ``"control"`` or ``"none"`` if present.
        A string matches a numeric label with the same text (``"0"`` matches 0).
    features : sequence of str, optional
        Feature columns; by default every other column except identifier-like text
        columns (unique in every row), which are listed in ``ignored``.
    sample_weight : str, optional
        Column of row weights.
    propensity : str or mapping, optional
        Exact assignment probabilities for logged (non-uniform) data: one column with the
        probability of the group each row actually received (single-arm campaigns), or a
        mapping ``{label: column}`` with one column per group, control included.
    n_splits : int
        Cross-validation folds (sets the minimum rows per group).
    source : str
        How to name the data in messages (e.g. the file path).

    Raises
    ------
    DataError
        Naming the column, the value and the fix.
    """
    if len(frame) == 0:
        raise DataError(f"{source} has no rows; export the campaign rows too.")
    _require(frame, treatment, "the treatment", source)
    _require(frame, outcome, "the outcome", source)
    if treatment == outcome:
        raise DataError(f"Treatment and outcome are both {treatment!r}; name two columns.")
    if sample_weight is not None:
        _require(frame, sample_weight, "the weight", source)
    prop_columns = (
        [propensity]
        if isinstance(propensity, str)
        else list(propensity.values())
        if propensity
        else []
    )
    reserved = [treatment, outcome, *([sample_weight] if sample_weight else []), *prop_columns]
    chosen, ignored = _features(frame, features, reserved, source)
    t, control_label, arms = _treatment(frame[treatment], treatment, control)
    y, kind = _outcome(frame[outcome], outcome)
    _check_arms(y, t, [control_label, *arms], kind, n_splits)
    X = pd.DataFrame({c: _numeric_feature(c, frame[c]) for c in chosen}, index=frame.index)
    X = X.reset_index(drop=True)
    p, p_columns = _propensity(frame, propensity, t, [control_label, *arms], source)
    columns: dict[str, Any] = {"treatment": treatment, "outcome": outcome, "features": chosen}
    if sample_weight is not None:
        columns["sample_weight"] = sample_weight
    if p_columns is not None:
        columns["propensity"] = p_columns
    return TrainingData(
        X, y, t, control_label, arms, kind, _weights(frame, sample_weight), p, columns, ignored
    )
