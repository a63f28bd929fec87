"""Validation of training input: treatment labels, outcome, propensities, weights."""

from __future__ import annotations

import warnings
from dataclasses import dataclass
from typing import Any

import numpy as np
import pandas as pd

from service.errors import DataError, OverlapWarning

__all__ = ["Arms", "check_arms", "check_outcome", "check_propensity", "check_weights"]

# Common practice, no source: propensities outside [0.05, 0.95] make inverse weights
# large enough (> 20) to dominate an estimate.
OVERLAP_BOUND = 0.05
OVERLAP_SHARE = 0.01


@dataclass(frozen=True)
class Arms:
    """Treatment labels resolved against the declared control and arms."""

    control: Any
    arms: tuple[Any, ...]
    index: np.ndarray  # 0 for control, k for arms[k - 1]

    @property
    def labels(self) -> tuple[Any, ...]:
        return (self.control, *self.arms)


def _default_control(labels: list[Any]) -> Any:
    for candidate in (0, "0", "control", "none", False):
        if candidate in labels:
            return candidate
    raise DataError(
        f"Cannot tell which treatment label is the control group among {labels}; "
        "name it with control=<label> (--control on the command line)."
    )


def _plain(value: Any) -> Any:
    return value.item() if isinstance(value, np.generic) else value


def check_arms(treatment: Any, control: Any, arms: Any, n_rows: int, min_rows: int) -> Arms:
    """Resolve treatment labels into arm indices, refusing anything ambiguous."""
    series = pd.Series(np.asarray(treatment, dtype=object).ravel())
    if len(series) != n_rows:
        raise DataError(
            f"treatment has {len(series)} values but the features have {n_rows} rows; "
            "pass one treatment label per row."
        )
    if series.isna().any():
        raise DataError(
            f"treatment is missing on {int(series.isna().sum())} row(s); drop those rows or "
            "fill in the arm each customer was assigned to."
        )
    values = series.map(_plain)
    seen = sorted(set(values), key=str)
    control = _default_control(seen) if control is None else control
    if control not in seen:
        raise DataError(
            f"The control label {control!r} does not occur in treatment (labels seen: "
            f"{seen}); pass the label used for the untreated group."
        )
    found = tuple(v for v in seen if v != control)
    declared = found if arms is None else tuple(arms)
    if set(declared) != set(found):
        raise DataError(
            f"Treatment labels {sorted(found, key=str)} do not match the declared arms "
            f"{list(declared)}; fix the labels in the data or the declared arms."
        )
    if not declared:
        raise DataError(
            f"Only the control label {control!r} occurs in treatment; uplift needs "
            "contacted rows too."
        )
    order = {label: k for k, label in enumerate((control, *declared))}
    index = values.map(order).to_numpy(dtype=np.int64)
    counts = np.bincount(index, minlength=len(order))
    for label, count in zip((control, *declared), counts, strict=True):
        if count < min_rows:
            raise DataError(
                f"Arm {label!r} has {count} row(s), fewer than the {min_rows} required; "
                "collect more data for it or drop the arm."
            )
    return Arms(control, declared, index)


def check_outcome(y: Any, n_rows: int, outcome: str) -> tuple[np.ndarray, str]:
    """Return the outcome as floats and its type, ``"binary"`` or ``"continuous"``."""
    if outcome not in ("auto", "binary", "continuous"):
        raise DataError(
            f"outcome={outcome!r} is not one of 'auto', 'binary', 'continuous'; pick one."
        )
    try:
        values = pd.to_numeric(pd.Series(np.asarray(y, dtype=object).ravel()), errors="raise")
    except (TypeError, ValueError) as err:
        raise DataError(
            "The outcome holds text; send 0/1 for a conversion or a number for an amount."
        ) from err
    array = values.to_numpy(dtype=float, na_value=np.nan)
    if len(array) != n_rows:
        raise DataError(
            f"The outcome has {len(array)} values but the features have {n_rows} rows; "
            "pass one outcome per row."
        )
    if not np.isfinite(array).all():
        raise DataError(
            f"The outcome is missing or infinite on {int((~np.isfinite(array)).sum())} "
            "row(s); drop those rows or record the observed outcome."
        )
    distinct = np.unique(array)
    if len(distinct) < 2:
        raise DataError(
            f"The outcome is constant ({distinct[0] if len(distinct) else 'empty'}) so "
            "there is nothing to learn; check the outcome column."
        )
    is_binary = set(distinct.tolist()) <= {0.0, 1.0}
    if outcome == "binary" and not is_binary:
        raise DataError(
            "outcome='binary' but the outcome holds values other than 0 and 1; recode it "
            "or declare it continuous."
        )
    kind = outcome if outcome != "auto" else ("binary" if is_binary else "continuous")
    return array, kind


def check_weights(sample_weight: Any, n_rows: int) -> np.ndarray:
    if sample_weight is None:
        return np.ones(n_rows)
    w = np.asarray(sample_weight, dtype=float).ravel()
    if len(w) != n_rows or not np.isfinite(w).all() or (w < 0).any() or w.sum() <= 0:
        raise DataError(
            "sample_weight must hold one finite, non-negative weight per row with a "
            "positive total; check the weight column."
        )
    return w


def check_propensity(propensity: Any, arms: Arms, weights: np.ndarray) -> tuple[np.ndarray, bool]:
    """Return the (n, 1 + n_arms) assignment-probability matrix and whether it was given.

    Without one, the campaign is taken as randomized with constant probabilities equal
    to the (weighted) arm shares.
    """
    n, k = len(arms.index), len(arms.labels)
    if propensity is None:
        shares = np.bincount(arms.index, weights=weights, minlength=k) / weights.sum()
        return np.tile(shares, (n, 1)), False
    p = np.asarray(propensity, dtype=float)
    if p.ndim == 1 and k == 2:
        p = np.column_stack([1.0 - p, p])
    if p.shape != (n, k):
        raise DataError(
            f"propensity must have shape ({n}, {k}) (columns {list(arms.labels)}), or "
            f"({n},) with P(treated) for a single arm; got {p.shape}."
        )
    if not np.isfinite(p).all() or (p <= 0).any() or (p >= 1).any():
        raise DataError(
            "propensity must lie strictly between 0 and 1 everywhere; a zero probability "
            "means that arm was never possible for the row, so drop the row or the arm."
        )
    if not np.allclose(p.sum(axis=1), 1.0, atol=1e-6):
        raise DataError("Each propensity row must sum to 1 over the arms; renormalise it.")
    warn_overlap(p)
    return p, True


def warn_overlap(p: np.ndarray) -> None:
    """Warn when many rows have an assignment probability near 0 or 1."""
    extreme = ((p < OVERLAP_BOUND) | (p > 1 - OVERLAP_BOUND)).any(axis=1).mean()
    if extreme > OVERLAP_SHARE:
        warnings.warn(
            f"{extreme:.1%} of rows have an assignment probability outside "
            f"[{OVERLAP_BOUND}, {1 - OVERLAP_BOUND}]; effect estimates there rest on few "
            "comparable rows. Restrict the population or check the assignment.",
            OverlapWarning,
            stacklevel=3,
        )
