"""Profit of contacting the top-scored fraction, for a conversion value and contact cost."""

from __future__ import annotations

from collections.abc import Hashable

from numpy.typing import ArrayLike

from service.errors import DataError
from service.evaluation._pairs import _select_pair
from service.evaluation._ranking import _cumulate, _rank
from service.evaluation.curves import Curve, _uplift_values

__all__ = ["profit_curve"]


def profit_curve(
    y: ArrayLike,
    treatment: ArrayLike,
    score: ArrayLike,
    *,
    value: float,
    cost: float,
    sample_weight: ArrayLike | None = None,
    control: Hashable | None = None,
    arm: Hashable | None = None,
) -> Curve:
    """Expected profit of contacting everyone in the top fraction, by fraction targeted.

    profit(k) = value * U(k) - cost * (N_T(k) + N_C(k)), where U(k) is the uplift curve
    (:func:`~service.evaluation.curves.uplift_curve`), i.e. the estimated incremental
    conversions among the top k if all of them were contacted, and N_T(k) + N_C(k) is the
    (weighted) number contacted. Amounts are on the scale of the evaluation sample; scale
    by population size / sample size to project a campaign. The best cut is at
    ``curve.x[curve.y.argmax()]``.

    Parameters
    ----------
    value : float
        Value of one conversion (use 1 when the outcome is already money).
    cost : float
        Cost of one contact, non-negative.

    Other parameters are those of :func:`~service.evaluation.curves.qini_curve`.

    Returns
    -------
    Curve
        ``x`` is the fraction targeted, ``y`` the profit at each tie-group boundary.

    References
    ----------
    .. [1] Rzepakowski, P., & Jaroszewicz, S. (2012). Decision trees for uplift modeling
       with single and multiple treatments. Knowledge and Information Systems, 32(2),
       303-327 (the uplift curve U(k) used here).
    """
    if cost < 0:
        raise DataError(f"cost must be zero or positive, got {cost!r}.")
    pair = _select_pair(y, treatment, score, sample_weight, control=control, arm=arm)
    cum = _cumulate(_rank(pair))
    return Curve(cum.x, value * _uplift_values(cum) - cost * (cum.n_t + cum.n_c))
