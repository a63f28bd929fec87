"""Honest segments: who is persuadable, in rules a campaign manager can act on.

For each contact arm a shallow regression tree on the transformed outcome (whose mean
given the features is the uplift) is grown on one half of the rows, and each of its
leaves is then *estimated* on the other half: its share of customers, the observed
uplift (treated minus control) with a Wald interval, the control outcome rate and the
mean predicted uplift. No figure of a segment is measured on the rows that chose its
split.
"""

from __future__ import annotations

import math
from dataclasses import asdict, dataclass, field
from typing import Any

import numpy as np
import pandas as pd
from sklearn.model_selection import train_test_split
from sklearn.tree import DecisionTreeRegressor

from service.errors import DataError
from service.evaluation._stats import _check_confidence, _difference
from service.evaluation._tree_rules import TreeFeatures, leaf_rules

__all__ = ["READINGS", "Segment", "honest_segments"]

READINGS = {
    "too few rows": "the held-out half has too few control or contacted rows here",
    "persuadables": "the contact raises the outcome (interval above zero)",
    "do-not-disturb": "the contact lowers the outcome (interval below zero)",
    "sure things": "no clear effect; the outcome is above average without contact",
    "lost causes": "no clear effect; the outcome is below average without contact",
}


@dataclass(frozen=True)
class Segment:
    """One leaf of an arm's segment tree, estimated on the held-out half.

    ``share`` is the leaf's weighted share of all held-out customers; ``n`` the held-out
    rows of the pair (control and this arm) it holds, on which ``uplift`` (with the
    interval ``low``, ``high``) and ``control_rate`` are measured; ``predicted_uplift``
    is the mean model score of the leaf's held-out customers.
    """

    rule: str
    share: float
    n: int
    arm: Any
    uplift: float | None
    low: float | None
    high: float | None
    control_rate: float | None
    predicted_uplift: float
    reading: str
    rows: np.ndarray = field(repr=False, compare=False, default_factory=lambda: np.empty(0, int))

    def to_dict(self) -> dict[str, Any]:
        """The JSON fields (``rows``, the held-out row positions, is left out)."""
        out = asdict(self)
        out.pop("rows")
        return out


def _reading(low: float, high: float, control_rate: float, overall: float) -> str:
    # Common practice, no source: the response groups read from an interval and from
    # the control rate against the average control rate.
    if math.isnan(low) or math.isnan(control_rate):
        return "too few rows"
    if low > 0:
        return "persuadables"
    if high < 0:
        return "do-not-disturb"
    return "sure things" if control_rate >= overall else "lost causes"


def _finite(value: float) -> float | None:
    return None if math.isnan(value) else float(value)


def _mean(values: np.ndarray, weights: np.ndarray) -> float:
    return float(np.average(values, weights=weights)) if len(values) else math.nan


def _check(depth: int, min_share: float, n: int) -> None:
    if not isinstance(depth, int) or not 1 <= depth <= 4:
        raise DataError(f"depth={depth!r} must be a whole number from 1 to 4 (readable rules).")
    if not 0 < min_share <= 0.5:
        raise DataError(f"min_share={min_share!r} must be in (0, 0.5], e.g. 0.05 for 5%.")
    if n < 200:
        raise DataError(f"{n} rows are too few for honest segments; pass at least 200.")


def honest_segments(
    X: pd.DataFrame,
    y: Any,
    treatment: Any,
    predicted: Any,
    *,
    arms: list[Any],
    control: Any,
    depth: int = 3,
    min_share: float = 0.05,
    sample_weight: Any = None,
    confidence: float = 0.95,
    random_state: int = 0,
) -> list[Segment]:
    """Segments per arm: split on one half of the rows, estimated on the other.

    Parameters
    ----------
    X : DataFrame
        Features to split on (numeric, text or categorical columns).
    y, treatment : arrays of shape (n,)
        Outcome and the group of each row.
    predicted : array of shape (n, len(arms))
        Predicted uplift per arm, preferably out of fold.
    arms, control
        Contact arm labels (columns of ``predicted``) and the control label.
    depth : int, default 3
        Depth of each tree (at most ``2 ** depth`` segments per arm).
    min_share : float, default 0.05
        Smallest segment, as a share of the arm pair's rows used to grow the tree.
    sample_weight : array, optional
        Row weights (inverse propensities of logged data); they weight every figure.
    confidence : float, default 0.95
    random_state : int
        Seeds the split into halves (stratified by group and outcome).

    Returns
    -------
    list of Segment, per arm by observed uplift (largest first).

    References
    ----------
    Athey, S. & Imbens, G. (2016). Recursive partitioning for heterogeneous causal
    effects. PNAS 113(27), 7353-7360 (honest estimation; the transformed outcome).
    """
    frame = X.reset_index(drop=True)
    y_arr = np.asarray(y, dtype=float)
    t_arr = np.asarray(treatment, dtype=object)
    scores = np.asarray(predicted, dtype=float).reshape(len(y_arr), -1)
    _check(depth, min_share, len(y_arr))
    z = _check_confidence(confidence)
    w = np.ones(len(y_arr)) if sample_weight is None else np.asarray(sample_weight, float)
    strata = pd.Series(t_arr.astype(str)) + "|" + pd.Series(y_arr > np.median(y_arr)).astype(str)
    grow, estimate = train_test_split(
        np.arange(len(y_arr)), test_size=0.5, random_state=random_state, stratify=strata
    )
    features = TreeFeatures.build(frame)
    is_control = t_arr == control
    held_control = estimate[is_control[estimate]]
    overall = float(np.average(y_arr[held_control], weights=w[held_control]))
    segments = []
    for j, arm in enumerate(arms):
        pair = is_control | (t_arr == arm)
        rows = grow[pair[grow]]
        treated = t_arr[rows] == arm
        share = float(np.average(treated, weights=w[rows]))
        transformed = y_arr[rows] * np.where(treated, 1 / share, -1 / (1 - share))
        tree = DecisionTreeRegressor(
            max_depth=depth,
            min_samples_leaf=max(1, math.ceil(min_share * len(rows))),
            random_state=random_state,
        ).fit(features.matrix[rows], transformed, sample_weight=w[rows])
        rules = leaf_rules(tree, features)
        leaf = tree.apply(features.matrix[estimate])
        found = []
        for node, rule in rules.items():
            inside = estimate[leaf == node]
            in_pair = inside[pair[inside]]
            diff = _difference(y_arr[in_pair], t_arr[in_pair] == arm, w[in_pair], z)
            reading = _reading(diff.low, diff.high, diff.mean_control, overall)
            found.append(
                Segment(
                    rule=rule,
                    share=float(w[inside].sum() / w[estimate].sum()),
                    n=len(in_pair),
                    arm=arm,
                    uplift=_finite(diff.estimate),
                    low=_finite(diff.low),
                    high=_finite(diff.high),
                    control_rate=_finite(diff.mean_control),
                    predicted_uplift=_mean(scores[inside, j], w[inside]),
                    reading=reading,
                    rows=inside,
                )
            )
        segments += sorted(found, key=lambda s: -(s.uplift if s.uplift is not None else -1e300))
    return segments
