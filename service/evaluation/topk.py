"""Observed uplift among the top-scored fraction of the population, with an interval."""

from __future__ import annotations

from collections.abc import Hashable
from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike

from service.errors import DataError
from service.evaluation._pairs import _select_pair
from service.evaluation._ranking import _cumulate, _Cumulative, _rank, _Ranked
from service.evaluation._stats import _check_confidence, _difference

__all__ = ["UpliftEstimate", "uplift_at_top"]

# Relative slack so that a cumulative weight equal to the requested share up to rounding
# (e.g. 0.30000000000000004 for 0.3) still counts as reaching it.
_SLACK = 1e-12


@dataclass(frozen=True)
class UpliftEstimate:
    """Observed uplift (treated mean minus control mean) with a confidence interval.

    Attributes
    ----------
    estimate, low, high : float
        Point estimate and interval bounds; NaN if an arm has no rows in the selection.
    n_treated, n_control : float
        Weighted counts (weight sums) of the two arms in the selection.
    fraction : float
        Fraction of the population actually selected (at least the one asked for, more
        when a tie group straddles the cut).
    """

    estimate: float
    low: float
    high: float
    n_treated: float
    n_control: float
    fraction: float


def _check_fraction(fraction: float) -> None:
    if not 0.0 < fraction <= 1.0:
        raise DataError(f"fraction must be in (0, 1], got {fraction!r}; e.g. 0.1 for 10%.")


def _top_group(cum: _Cumulative, fraction: float) -> int:
    """Index (into the boundaries) of the first whole tie group reaching ``fraction``."""
    reached = cum.x[1:] >= fraction * (1.0 - _SLACK)
    return int(np.argmax(reached)) + 1


def _uplift_at_top(ranked: _Ranked, cum: _Cumulative, fraction: float, z: float) -> UpliftEstimate:
    group = _top_group(cum, fraction)
    rows = slice(0, int(ranked.ends[group - 1]))
    pair = ranked.pair
    diff = _difference(pair.y[rows], pair.treated[rows], pair.weight[rows], z)
    return UpliftEstimate(
        diff.estimate, diff.low, diff.high, diff.n_treated, diff.n_control, float(cum.x[group])
    )


def uplift_at_top(
    y: ArrayLike,
    treatment: ArrayLike,
    score: ArrayLike,
    fraction: float = 0.1,
    *,
    sample_weight: ArrayLike | None = None,
    control: Hashable | None = None,
    arm: Hashable | None = None,
    confidence: float = 0.95,
) -> UpliftEstimate:
    """Observed uplift among the top ``fraction`` of rows by score.

    The selection is the smallest set of whole tie groups, taken by descending score,
    whose weight is at least ``fraction`` of the total; tied rows are never split, so the
    result does not depend on row order. The estimate is the weighted treated mean minus
    the weighted control mean. The interval is the normal-approximation (Wald) interval
    estimate +/- z * sqrt(s_T^2 / n_T + s_C^2 / n_C), with s^2 the weighted plug-in
    variance of each arm and n its Kish effective sample size (sum w)^2 / sum w^2. With
    unit weights and a 0/1 outcome this is the textbook Wald interval for a difference of
    proportions. Weights are treated as sampling (e.g. inverse-propensity) weights: integer
    weights give the same estimate as repeated rows but a wider interval.

    Parameters
    ----------
    fraction : float, default 0.1
        Share of the population to select, in (0, 1].
    confidence : float, default 0.95
        Coverage of the interval.

    Other parameters are those of :func:`~service.evaluation.curves.qini_curve`.

    Returns
    -------
    UpliftEstimate

    References
    ----------
    .. [1] Agresti, A. (2013). Categorical Data Analysis (3rd ed.). Wiley (Wald interval
       for a difference of proportions).
    .. [2] Kish, L. (1965). Survey Sampling. Wiley (effective sample size).
    """
    _check_fraction(fraction)
    z = _check_confidence(confidence)
    ranked = _rank(_select_pair(y, treatment, score, sample_weight, control=control, arm=arm))
    return _uplift_at_top(ranked, _cumulate(ranked), fraction, z)
