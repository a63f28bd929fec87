"""Validate evaluation inputs and select one treated arm and its control.

Every public metric goes through :func:`_select_pair`, so the checks (lengths, NaN, labels,
empty arms) and the multi-arm rule (rows of other arms are dropped) live in one place.
"""

from __future__ import annotations

from collections.abc import Hashable
from dataclasses import dataclass

import numpy as np
import pandas as pd
from numpy.typing import ArrayLike, NDArray

from service.errors import DataError

FloatArray = NDArray[np.float64]
BoolArray = NDArray[np.bool_]


@dataclass(frozen=True)
class _Pair:
    """One treated arm against control, as aligned float/bool arrays."""

    y: FloatArray
    treated: BoolArray
    score: FloatArray
    weight: FloatArray


def _as_1d(name: str, values: ArrayLike) -> NDArray[np.generic]:
    array = np.asarray(values)
    if array.ndim != 1:
        raise DataError(
            f"{name} must be one-dimensional, got shape {array.shape}; "
            "pass one column (one arm) at a time."
        )
    return array


def _as_float(name: str, values: NDArray[np.generic]) -> FloatArray:
    try:
        return values.astype(np.float64)
    except (TypeError, ValueError) as err:
        raise DataError(f"{name} must be numeric, got dtype {values.dtype}.") from err


def _check_lengths(arrays: dict[str, NDArray[np.generic]]) -> None:
    lengths = {name: len(array) for name, array in arrays.items()}
    if len(set(lengths.values())) > 1:
        listed = ", ".join(f"{name} has {n}" for name, n in lengths.items())
        raise DataError(f"Arrays must have the same length, but {listed} rows; align them.")


def _check_finite(
    name: str, values: FloatArray, rows: BoolArray | None = None, *, allow_inf: bool = False
) -> None:
    bad = np.isnan(values) if allow_inf else ~np.isfinite(values)
    if rows is not None:
        bad &= rows
    if bad.any():
        first = int(np.flatnonzero(bad)[0])
        raise DataError(
            f"{name} has {int(bad.sum())} missing or non-finite values (first at row {first}); "
            "drop or impute those rows before evaluating."
        )


def _weights(sample_weight: NDArray[np.generic] | None, n: int) -> FloatArray:
    if sample_weight is None:
        return np.ones(n)
    weight = _as_float("sample_weight", sample_weight)
    _check_finite("sample_weight", weight)
    if (weight < 0).any():
        raise DataError("sample_weight has negative values; weights must be zero or positive.")
    return weight


def _treated_mask(
    labels: NDArray[np.generic], control: Hashable | None, arm: Hashable | None
) -> tuple[BoolArray, BoolArray]:
    """Return (rows to keep, treated among all rows) for the chosen pair."""
    present = list(pd.unique(labels))
    if control is None and arm is None:
        if not all(_is_zero_one(v) for v in present):
            shown = sorted(map(str, present))[:10]
            raise DataError(
                f"treatment has labels {shown}, not a 0/1 indicator; pass control=<label> "
                "and arm=<label> to choose the pair to compare."
            )
        treated = labels.astype(np.float64) == 1.0
        return np.ones(len(labels), dtype=bool), treated
    if control is None or arm is None:
        raise DataError(
            "Pass both control=<label> and arm=<label>, or neither for a 0/1 indicator."
        )
    if control == arm:
        raise DataError(f"control and arm are both {control!r}; choose two different labels.")
    for role, label in (("control", control), ("arm", arm)):
        if label not in present:
            shown = sorted(map(str, present))[:10]
            raise DataError(
                f"{role} label {label!r} is not among the treatment labels {shown}; "
                "pass one of those."
            )
    treated = labels == arm
    return treated | (labels == control), treated


def _is_zero_one(value: object) -> bool:
    try:
        return bool(value == 0 or value == 1)
    except (TypeError, ValueError):
        return False


def _select_pair(
    y: ArrayLike,
    treatment: ArrayLike,
    score: ArrayLike,
    sample_weight: ArrayLike | None = None,
    *,
    control: Hashable | None = None,
    arm: Hashable | None = None,
) -> _Pair:
    """Validate the inputs and keep the rows of ``arm`` and ``control`` only.

    With ``control`` and ``arm`` both None, ``treatment`` must be a 0/1 (or boolean)
    indicator with 1 meaning treated.
    """
    arrays = {"y": _as_1d("y", y), "treatment": _as_1d("treatment", treatment)}
    arrays["score"] = _as_1d("score", score)
    if sample_weight is not None:
        arrays["sample_weight"] = _as_1d("sample_weight", sample_weight)
    _check_lengths(arrays)
    outcome = _as_float("y", arrays["y"])
    ranking = _as_float("score", arrays["score"])
    weight = _weights(arrays.get("sample_weight"), len(outcome))
    keep, treated = _treated_mask(arrays["treatment"], control, arm)
    _check_finite("y", outcome, keep)
    _check_finite("score", ranking, keep, allow_inf=True)
    pair = _Pair(outcome[keep], treated[keep], ranking[keep], weight[keep])
    _check_arms(pair, control, arm)
    return pair


def _check_arms(pair: _Pair, control: Hashable | None, arm: Hashable | None) -> None:
    for role, rows, label in (("treated", pair.treated, arm), ("control", ~pair.treated, control)):
        if not (pair.weight[rows] > 0).any():
            name = f" ({label!r})" if label is not None else ""
            raise DataError(
                f"There are no {role} rows{name} with positive weight; both arms are needed "
                "to estimate uplift, so check the treatment labels and the row filter."
            )
