"""One JSON-ready summary per treated arm, for training reports and model comparison."""

from __future__ import annotations

import math
from collections.abc import Hashable, Mapping, Sequence
from typing import Any

import numpy as np
import pandas as pd
from numpy.typing import ArrayLike

from service.errors import DataError
from service.evaluation._pairs import _select_pair
from service.evaluation._ranking import _cumulate, _rank
from service.evaluation._stats import _check_confidence
from service.evaluation.areas import _area_above_random, _auuc, _perfect_area
from service.evaluation.topk import UpliftEstimate, _check_fraction, _uplift_at_top

__all__ = ["evaluate_uplift"]


def _score_columns(
    scores: Mapping[Hashable, ArrayLike] | ArrayLike, arms: Sequence[Hashable]
) -> list[ArrayLike]:
    """One score array per arm, in the order of ``arms``."""
    if isinstance(scores, Mapping | pd.DataFrame):
        missing = [arm for arm in arms if arm not in scores]
        if missing:
            raise DataError(f"scores has no column for arms {missing}; add one per arm.")
        return [scores[arm] for arm in arms]
    matrix = np.asarray(scores)
    if matrix.ndim == 1 and len(arms) == 1:
        return [matrix]
    if matrix.ndim != 2 or matrix.shape[1] != len(arms):
        raise DataError(
            f"scores has shape {matrix.shape} but {len(arms)} arms were named; pass one "
            "column per arm, in the order of arms."
        )
    return [matrix[:, j] for j in range(len(arms))]


def _number(value: float) -> float | None:
    return value if math.isfinite(value) else None


def evaluate_uplift(
    y: ArrayLike,
    treatment: ArrayLike,
    scores: Mapping[Hashable, ArrayLike] | ArrayLike,
    arms: Sequence[Hashable],
    control: Hashable,
    *,
    sample_weight: ArrayLike | None = None,
    top: Sequence[float] = (0.1, 0.2, 0.3),
    confidence: float = 0.95,
) -> dict[str, dict[str, Any]]:
    """Summarise how well each arm's score ranks people by uplift against control.

    Each arm is compared with ``control`` on the rows of those two groups only.

    Parameters
    ----------
    y : array-like of shape (n,)
        Outcome, 0/1 or continuous.
    treatment : array-like of shape (n,)
        Group label of each row (the control label or one of ``arms``).
    scores : mapping or array-like of shape (n, len(arms))
        Predicted uplift of each arm against control: a mapping (or DataFrame) from arm
        label to a column, or a matrix whose column j scores ``arms[j]``.
    arms : sequence of hashable
        Labels of the treated arms to evaluate.
    control : hashable
        Label of the control group.
    sample_weight : array-like of shape (n,), optional
        Non-negative row weights.
    top : sequence of float, default (0.1, 0.2, 0.3)
        Fractions for :func:`~service.evaluation.topk.uplift_at_top`.
    confidence : float, default 0.95
        Coverage of the intervals.

    Returns
    -------
    dict
        Keyed by ``str(arm)``; each value holds ``arm``, ``control``, ``n_treated``,
        ``n_control`` (weight sums), ``qini`` (unnormalised Qini coefficient),
        ``qini_normalized`` (None when the best achievable area is not positive), ``auuc``,
        ``confidence`` and ``uplift_at_top``: a list of dicts with ``fraction`` (asked),
        ``fraction_selected``, ``estimate``, ``low``, ``high``, ``n_treated`` and
        ``n_control``. Undefined numbers are None, so the result is JSON-serialisable.

    References
    ----------
    .. [1] Radcliffe, N. J. (2007). Using control groups to target on predicted lift:
       building and assessing uplift models. Direct Marketing Analytics Journal, 1, 14-21.
    .. [2] Rzepakowski, P., & Jaroszewicz, S. (2012). Decision trees for uplift modeling
       with single and multiple treatments. Knowledge and Information Systems, 32(2),
       303-327.
    """
    if len(arms) == 0:
        raise DataError("arms is empty; name at least one treated arm to evaluate.")
    for fraction in top:
        _check_fraction(fraction)
    z = _check_confidence(confidence)
    summary: dict[str, dict[str, Any]] = {}
    for arm, score in zip(arms, _score_columns(scores, arms), strict=True):
        pair = _select_pair(y, treatment, score, sample_weight, control=control, arm=arm)
        ranked = _rank(pair)
        cum = _cumulate(ranked)
        qini, perfect = _area_above_random(cum), _perfect_area(pair)
        summary[str(arm)] = {
            "arm": str(arm),
            "control": str(control),
            "n_treated": float(cum.n_t[-1]),
            "n_control": float(cum.n_c[-1]),
            "qini": qini,
            "qini_normalized": qini / perfect if perfect > 0.0 else None,
            "auuc": _auuc(cum),
            "confidence": confidence,
            "uplift_at_top": [
                _top_entry(fraction, _uplift_at_top(ranked, cum, fraction, z)) for fraction in top
            ],
        }
    return summary


def _top_entry(fraction: float, estimate: UpliftEstimate) -> dict[str, float | None]:
    return {
        "fraction": float(fraction),
        "fraction_selected": estimate.fraction,
        "estimate": _number(estimate.estimate),
        "low": _number(estimate.low),
        "high": _number(estimate.high),
        "n_treated": estimate.n_treated,
        "n_control": estimate.n_control,
    }
