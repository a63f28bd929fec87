"""Single-number summaries of the curves: the Qini coefficient and the AUUC."""

from __future__ import annotations

from collections.abc import Hashable

import numpy as np
from numpy.typing import ArrayLike

from service.errors import DataError
from service.evaluation._pairs import _Pair, _select_pair
from service.evaluation._ranking import _cumulate, _Cumulative, _rank
from service.evaluation.curves import _perfect_pair, _qini_values, _uplift_values

__all__ = ["qini_coefficient", "auuc"]


def _area_above_random(cum: _Cumulative) -> float:
    qini = _qini_values(cum)
    # x ends at exactly 1, so the random line (0, 0)-(1, Q(N)) has area Q(N) / 2.
    return float(np.trapezoid(qini, cum.x)) - 0.5 * float(qini[-1])


def _perfect_area(pair: _Pair) -> float:
    """Area above the random line of the best achievable Qini curve."""
    return _area_above_random(_cumulate(_rank(_perfect_pair(pair))))


def _auuc(cum: _Cumulative) -> float:
    total = float(cum.n_t[-1] + cum.n_c[-1])
    return float(np.trapezoid(_uplift_values(cum), cum.x)) / total


def qini_coefficient(
    y: ArrayLike,
    treatment: ArrayLike,
    score: ArrayLike,
    *,
    sample_weight: ArrayLike | None = None,
    control: Hashable | None = None,
    arm: Hashable | None = None,
    normalize: bool = True,
) -> float:
    """Area between the Qini curve and the random-targeting line.

    The area is taken by the trapezoid rule over the tie-group boundaries of
    :func:`~service.evaluation.curves.qini_curve`, minus the area under the straight line
    from (0, 0) to (1, Q(N)). With ``normalize=True`` it is divided by the same area for
    the best achievable curve (:func:`~service.evaluation.curves.perfect_qini_curve`), so
    the best ordering scores 1 and random targeting about 0. Unnormalised, the area is in
    outcome units (incremental responders times fraction targeted). Other parameters are
    those of :func:`~service.evaluation.curves.qini_curve`.

    Returns
    -------
    float
        The (normalised) Qini coefficient.

    Raises
    ------
    DataError
        As for ``qini_curve``, and when normalising while the best achievable area is not
        positive (e.g. no outcome variation), where the ratio is undefined.

    References
    ----------
    .. [1] Radcliffe, N. J. (2007). Using control groups to target on predicted lift:
       building and assessing uplift models. Direct Marketing Analytics Journal, 1, 14-21.
    .. [2] Radcliffe, N. J., & Surry, P. D. (2011). Real-world uplift modelling with
       significance-based uplift trees. Stochastic Solutions White Paper 2011-1.
    """
    pair = _select_pair(y, treatment, score, sample_weight, control=control, arm=arm)
    model = _area_above_random(_cumulate(_rank(pair)))
    if not normalize:
        return model
    perfect = _perfect_area(pair)
    if perfect <= 0.0:
        raise DataError(
            f"The best achievable Qini area is {perfect:.6g}, not positive, so the "
            "normalised Qini is undefined; use normalize=False or check the outcomes vary."
        )
    return model / perfect


def auuc(
    y: ArrayLike,
    treatment: ArrayLike,
    score: ArrayLike,
    *,
    sample_weight: ArrayLike | None = None,
    control: Hashable | None = None,
    arm: Hashable | None = None,
) -> float:
    """Area under the uplift curve per member of the population.

    AUUC = integral over x in [0, 1] of U(x) / N, by the trapezoid rule over the
    tie-group boundaries, where U is :func:`~service.evaluation.curves.uplift_curve` and
    N = N_T + N_C is the total (weighted) population. U(x) / N is the uplift among the
    top x times x, so the AUUC is in outcome units per person; random targeting gives
    about half the average effect. Parameters are those of ``qini_curve``.

    References
    ----------
    .. [1] Rzepakowski, P., & Jaroszewicz, S. (2012). Decision trees for uplift modeling
       with single and multiple treatments. Knowledge and Information Systems, 32(2),
       303-327.
    """
    pair = _select_pair(y, treatment, score, sample_weight, control=control, arm=arm)
    return _auuc(_cumulate(_rank(pair)))
