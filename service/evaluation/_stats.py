"""Difference of weighted arm means with a normal-approximation (Wald) interval."""

from __future__ import annotations

import math
from typing import NamedTuple

from scipy.stats import norm

from service.errors import DataError
from service.evaluation._pairs import BoolArray, FloatArray


class _Difference(NamedTuple):
    estimate: float
    low: float
    high: float
    n_treated: float
    n_control: float
    mean_treated: float
    mean_control: float


def _check_confidence(confidence: float) -> float:
    if not 0.0 < confidence < 1.0:
        raise DataError(f"confidence must be between 0 and 1 (exclusive), got {confidence!r}.")
    return float(norm.ppf(0.5 + confidence / 2.0))


def _arm(y: FloatArray, weight: FloatArray) -> tuple[float, float, float]:
    """Return (weight sum, weighted mean, variance of the mean) for one arm.

    The variance of the mean is the weighted plug-in variance over Kish's effective
    sample size, (sum w)^2 / sum w^2; with unit weights it is p(1 - p) / n for a 0/1
    outcome.
    """
    total = float(weight.sum())
    if total <= 0.0:
        return 0.0, math.nan, math.nan
    mean = float(weight @ y) / total
    variance = float(weight @ (y - mean) ** 2) / total
    n_effective = total**2 / float(weight @ weight)
    return total, mean, variance / n_effective


def _difference(y: FloatArray, treated: BoolArray, weight: FloatArray, z: float) -> _Difference:
    """Treated mean minus control mean with a Wald interval at critical value ``z``.

    NaN where an arm has no weight.
    """
    n_t, mean_t, var_t = _arm(y[treated], weight[treated])
    n_c, mean_c, var_c = _arm(y[~treated], weight[~treated])
    estimate = mean_t - mean_c
    half = z * math.sqrt(var_t + var_c) if not math.isnan(estimate) else math.nan
    return _Difference(estimate, estimate - half, estimate + half, n_t, n_c, mean_t, mean_c)
