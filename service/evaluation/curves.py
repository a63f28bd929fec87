"""Qini and uplift curves of a score, and the best achievable ("perfect") Qini curve.

Notation used throughout ``service.evaluation``: sort rows by descending score and, after
the first k rows, let N_T(k) and N_C(k) be the (weighted) numbers of treated and control
rows and Y_T(k) and Y_C(k) the (weighted) sums of their outcomes. Curves are evaluated
only at the ends of groups of equal scores, so tied rows are always taken together and the
result does not depend on row order. The x axis is the fraction of the population (of the
total weight of the two arms compared) targeted, from 0 to 1.
"""

from __future__ import annotations

from collections.abc import Hashable
from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike

from service.evaluation._pairs import FloatArray, _Pair, _select_pair
from service.evaluation._ranking import _cumulate, _Cumulative, _rank

__all__ = ["Curve", "qini_curve", "uplift_curve", "perfect_qini_curve"]


@dataclass(frozen=True, eq=False)
class Curve:
    """A curve over the fraction of the population targeted.

    Attributes
    ----------
    x : ndarray
        Fraction of the population targeted, increasing from 0 to 1, one point per
        boundary between groups of equal scores (plus the origin).
    y : ndarray
        Curve value at each ``x`` (read-only, like ``x``).
    """

    x: FloatArray
    y: FloatArray

    def __post_init__(self) -> None:
        self.x.setflags(write=False)
        self.y.setflags(write=False)


def _qini_values(cum: _Cumulative) -> FloatArray:
    # Where N_C(k) = 0 there is no control outcome to scale (Y_C(k) = 0 too), so the
    # control term is 0 and Q(k) = Y_T(k).
    ratio = np.divide(cum.n_t, cum.n_c, out=np.zeros_like(cum.n_t), where=cum.n_c > 0)
    return cum.y_t - cum.y_c * ratio


def _uplift_values(cum: _Cumulative) -> FloatArray:
    both = (cum.n_t > 0) & (cum.n_c > 0)
    rate_t = np.divide(cum.y_t, cum.n_t, out=np.zeros_like(cum.y_t), where=both)
    rate_c = np.divide(cum.y_c, cum.n_c, out=np.zeros_like(cum.y_c), where=both)
    return (rate_t - rate_c) * (cum.n_t + cum.n_c)


def _perfect_score(pair: _Pair) -> FloatArray:
    """A score whose ordering is the best achievable for the Qini curve."""
    responders = pair.y == 1.0
    if np.isin(pair.y, (0.0, 1.0)).all():
        # Treated responders first, control responders last, everyone else tied between.
        first = (pair.treated & responders).astype(np.float64)
        perfect: FloatArray = first - (~pair.treated & responders).astype(np.float64)
        return perfect
    # Treated by descending outcome, then control by ascending outcome (dense ranks keep
    # equal outcomes of one arm tied).
    levels, rank = np.unique(pair.y, return_inverse=True)
    return np.where(pair.treated, rank + len(levels), -rank).astype(np.float64)


def _perfect_pair(pair: _Pair) -> _Pair:
    return _Pair(pair.y, pair.treated, _perfect_score(pair), pair.weight)


def qini_curve(
    y: ArrayLike,
    treatment: ArrayLike,
    score: ArrayLike,
    *,
    sample_weight: ArrayLike | None = None,
    control: Hashable | None = None,
    arm: Hashable | None = None,
) -> Curve:
    """Qini curve: incremental outcomes among the top-scored fraction of the population.

    Q(k) = Y_T(k) - Y_C(k) * N_T(k) / N_C(k), the treated outcomes minus the control
    outcomes scaled to the treated count. Where N_C(k) = 0 the control term is taken as
    0 (Y_C(k) is then 0 too), so Q(k) = Y_T(k).

    Parameters
    ----------
    y : array-like of shape (n,)
        Outcome, 0/1 or continuous.
    treatment : array-like of shape (n,)
        A 0/1 treated indicator, or arm labels together with ``control`` and ``arm``.
    score : array-like of shape (n,)
        Predicted uplift of ``arm``; higher means target first. Ties are kept together.
    sample_weight : array-like of shape (n,), optional
        Non-negative row weights (e.g. inverse propensity); counts become weight sums.
    control, arm : hashable, optional
        Labels of the control group and of the treated arm; rows of other arms are
        dropped. Leave both unset when ``treatment`` is a 0/1 indicator.

    Returns
    -------
    Curve
        ``x`` is the fraction targeted, ``y`` is Q at each tie-group boundary.

    Raises
    ------
    DataError
        On mismatched lengths, missing values, unknown labels or an empty arm.

    References
    ----------
    .. [1] Radcliffe, N. J. (2007). Using control groups to target on predicted lift:
       building and assessing uplift models. Direct Marketing Analytics Journal, 1, 14-21.
    .. [2] Radcliffe, N. J., & Surry, P. D. (2011). Real-world uplift modelling with
       significance-based uplift trees. Stochastic Solutions White Paper 2011-1.
    """
    pair = _select_pair(y, treatment, score, sample_weight, control=control, arm=arm)
    cum = _cumulate(_rank(pair))
    return Curve(cum.x, _qini_values(cum))


def uplift_curve(
    y: ArrayLike,
    treatment: ArrayLike,
    score: ArrayLike,
    *,
    sample_weight: ArrayLike | None = None,
    control: Hashable | None = None,
    arm: Hashable | None = None,
) -> Curve:
    """Uplift curve: observed uplift among the top fraction, scaled to its size.

    U(k) = (Y_T(k) / N_T(k) - Y_C(k) / N_C(k)) * (N_T(k) + N_C(k)), the estimated
    incremental outcomes if everyone in the top k were treated; 0 where either arm is
    still empty. Parameters are those of :func:`qini_curve`.

    Returns
    -------
    Curve
        ``x`` is the fraction targeted, ``y`` is U at each tie-group boundary.

    References
    ----------
    .. [1] Rzepakowski, P., & Jaroszewicz, S. (2012). Decision trees for uplift modeling
       with single and multiple treatments. Knowledge and Information Systems, 32(2),
       303-327.
    """
    pair = _select_pair(y, treatment, score, sample_weight, control=control, arm=arm)
    cum = _cumulate(_rank(pair))
    return Curve(cum.x, _uplift_values(cum))


def perfect_qini_curve(
    y: ArrayLike,
    treatment: ArrayLike,
    *,
    sample_weight: ArrayLike | None = None,
    control: Hashable | None = None,
    arm: Hashable | None = None,
) -> Curve:
    """The best achievable Qini curve for these outcomes (Radcliffe's optimum curve).

    For a 0/1 outcome the ordering puts treated responders first, control responders
    last and everyone else, tied, in between. For a continuous outcome it puts the treated
    rows first by descending outcome, then the control rows by ascending outcome (equal
    outcomes within an arm are tied). Parameters are those of :func:`qini_curve`.

    References
    ----------
    .. [1] Radcliffe, N. J. (2007). Using control groups to target on predicted lift:
       building and assessing uplift models. Direct Marketing Analytics Journal, 1, 14-21.
    """
    dummy = np.zeros_like(np.asarray(y), dtype=np.float64)
    pair = _select_pair(y, treatment, dummy, sample_weight, control=control, arm=arm)
    cum = _cumulate(_rank(_perfect_pair(pair)))
    return Curve(cum.x, _qini_values(cum))
