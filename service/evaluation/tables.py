"""Per-bin tables: uplift by score decile and calibration of predicted uplift."""

from __future__ import annotations

from collections.abc import Hashable
from typing import Literal

import pandas as pd
from numpy.typing import ArrayLike

from service.errors import DataError
from service.evaluation._binning import IntArray, _check_bins, _quantile_bins, _uniform_bins
from service.evaluation._pairs import _select_pair
from service.evaluation._ranking import _cumulate, _rank, _Ranked
from service.evaluation._stats import _check_confidence, _difference

__all__ = ["decile_table", "calibration_table"]

_NAN = float("nan")
_OBSERVED = {
    "uplift": "observed_uplift",
    "uplift_low": "observed_low",
    "uplift_high": "observed_high",
}


def _bin_rows(ranked: _Ranked, bins: IntArray, n_bins: int, z: float) -> pd.DataFrame:
    pair, rows = ranked.pair, []
    for number in range(1, n_bins + 1):
        members = bins == number
        diff = _difference(pair.y[members], pair.treated[members], pair.weight[members], z)
        weight, score = pair.weight[members], pair.score[members]
        total = float(weight.sum())
        rows.append(
            {
                "bin": number,
                "score_min": float(score.min()) if members.any() else _NAN,
                "score_max": float(score.max()) if members.any() else _NAN,
                "n_treated": diff.n_treated,
                "n_control": diff.n_control,
                "rate_treated": diff.mean_treated,
                "rate_control": diff.mean_control,
                "uplift": diff.estimate,
                "uplift_low": diff.low,
                "uplift_high": diff.high,
                "predicted_uplift": float(weight @ score) / total if total > 0 else _NAN,
            }
        )
    return pd.DataFrame(rows)


def decile_table(
    y: ArrayLike,
    treatment: ArrayLike,
    score: ArrayLike,
    *,
    n_bins: int = 10,
    sample_weight: ArrayLike | None = None,
    control: Hashable | None = None,
    arm: Hashable | None = None,
    confidence: float = 0.95,
) -> pd.DataFrame:
    """Observed and predicted uplift per score bin (deciles by default), top bin first.

    Rows are ranked by descending score and cut at weight quantiles; a whole tie group
    goes to the bin holding the middle of its cumulative weight, so tied rows share a bin
    and bins hold about ``1 / n_bins`` of the weight each (heavy ties can leave a bin
    empty; its row then has zero counts and NaN rates).

    Parameters
    ----------
    n_bins : int, default 10
        Number of bins.
    confidence : float, default 0.95
        Coverage of the uplift interval.

    Other parameters are those of :func:`~service.evaluation.curves.qini_curve`.

    Returns
    -------
    pandas.DataFrame
        One row per bin (``bin`` 1 = highest scores) with columns ``score_min``,
        ``score_max``, ``n_treated`` and ``n_control`` (weight sums), ``rate_treated`` and
        ``rate_control`` (weighted mean outcome, the response rate for a 0/1 outcome),
        ``uplift`` (their difference) with Wald interval ``uplift_low``/``uplift_high`` as
        in :func:`~service.evaluation.topk.uplift_at_top`, and ``predicted_uplift``
        (weighted mean score of the bin).

    References
    ----------
    .. [1] Radcliffe, N. J., & Surry, P. D. (2011). Real-world uplift modelling with
       significance-based uplift trees. Stochastic Solutions White Paper 2011-1.
    """
    _check_bins(n_bins)
    z = _check_confidence(confidence)
    ranked = _rank(_select_pair(y, treatment, score, sample_weight, control=control, arm=arm))
    return _bin_rows(ranked, _quantile_bins(ranked, _cumulate(ranked), n_bins), n_bins, z)


def calibration_table(
    y: ArrayLike,
    treatment: ArrayLike,
    score: ArrayLike,
    *,
    n_bins: int = 10,
    strategy: Literal["quantile", "uniform"] = "quantile",
    sample_weight: ArrayLike | None = None,
    control: Hashable | None = None,
    arm: Hashable | None = None,
    confidence: float = 0.95,
) -> pd.DataFrame:
    """Predicted against observed uplift per score bin, with the observed interval.

    A well-calibrated score has ``observed_uplift`` close to ``predicted_uplift`` in every
    bin; ``covered`` says whether the interval of the observed uplift contains the
    predicted one (expect about ``confidence`` of the non-empty bins to be covered).

    Parameters
    ----------
    n_bins : int, default 10
        Number of bins.
    strategy : {"quantile", "uniform"}, default "quantile"
        "quantile" cuts at weight quantiles exactly as :func:`decile_table` does;
        "uniform" cuts the score range into equal-width intervals (ties always share a bin
        either way).
    confidence : float, default 0.95
        Coverage of the observed-uplift interval.

    Other parameters are those of :func:`~service.evaluation.curves.qini_curve`.

    Returns
    -------
    pandas.DataFrame
        One row per bin (``bin`` 1 = highest scores) with columns ``score_min``,
        ``score_max``, ``n_treated``, ``n_control``, ``predicted_uplift`` (weighted mean
        score), ``observed_uplift`` with ``observed_low``/``observed_high``, and
        ``covered`` (bool; False for a bin lacking an arm).

    References
    ----------
    .. [1] DeGroot, M. H., & Fienberg, S. E. (1983). The comparison and evaluation of
       forecasters. Journal of the Royal Statistical Society, Series D (The Statistician),
       32(1/2), 12-22.
    """
    _check_bins(n_bins)
    z = _check_confidence(confidence)
    ranked = _rank(_select_pair(y, treatment, score, sample_weight, control=control, arm=arm))
    if strategy == "quantile":
        bins = _quantile_bins(ranked, _cumulate(ranked), n_bins)
    elif strategy == "uniform":
        bins = _uniform_bins(ranked, n_bins)
    else:
        raise DataError(f"strategy must be 'quantile' or 'uniform', got {strategy!r}.")
    table = _bin_rows(ranked, bins, n_bins, z).rename(columns=_OBSERVED)
    table["covered"] = (table["observed_low"] <= table["predicted_uplift"]) & (
        table["predicted_uplift"] <= table["observed_high"]
    )
    columns = ["bin", "score_min", "score_max", "n_treated", "n_control", "predicted_uplift"]
    return table[[*columns, "observed_uplift", "observed_low", "observed_high", "covered"]]
