"""Policy value from logged decisions: IPS, self-normalised IPS and doubly robust.

Each estimator returns an :class:`Estimate` with a normal-approximation interval:
IPS and DR average independent per-row terms, so the central limit theorem gives their
standard error; SNIPS is a ratio of two means, so its standard error comes from the
delta method (the linearised ratio, equal to the HC0 sandwich of a weighted mean).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
import numpy.typing as npt
from scipy.stats import norm

from service.errors import DataError

__all__ = [
    "Estimate",
    "critical_value",
    "dr_estimate",
    "ips_estimate",
    "mean_with_interval",
    "snips_estimate",
]

FloatArray = npt.NDArray[np.float64]
IntArray = npt.NDArray[np.intp]


@dataclass(frozen=True)
class Estimate:
    """An estimate with its two-sided normal interval (a policy value, a lift, ...)."""

    method: str
    value: float
    low: float
    high: float
    std_error: float
    confidence: float
    n: int

    def to_dict(self) -> dict[str, float | int | str]:
        """JSON-ready fields."""
        return {
            "method": self.method,
            "value": self.value,
            "low": self.low,
            "high": self.high,
            "std_error": self.std_error,
            "confidence": self.confidence,
            "n": self.n,
        }


def critical_value(confidence: float) -> float:
    """Two-sided standard-normal critical value, e.g. 1.96 for ``confidence=0.95``."""
    if not (math.isfinite(confidence) and 0.0 < confidence < 1.0):
        raise DataError(f"confidence={confidence!r} must lie strictly between 0 and 1; use 0.95.")
    return float(norm.ppf(0.5 + confidence / 2.0))


def _estimate(method: str, value: float, se: float, confidence: float, n: int) -> Estimate:
    half = critical_value(confidence) * se
    return Estimate(method, value, value - half, value + half, se, confidence, n)


def mean_with_interval(terms: FloatArray, method: str, confidence: float) -> Estimate:
    """Mean of independent per-row terms with a CLT interval (standard deviation, ddof=1)."""
    n = len(terms)
    if n < 2:
        raise DataError(f"{method}: {n} row(s) given; at least 2 are needed for an interval.")
    se = float(np.std(terms, ddof=1)) / math.sqrt(n)
    return _estimate(method, float(np.mean(terms)), se, confidence, n)


def ips_estimate(
    rewards: FloatArray, weights: FloatArray, *, confidence: float = 0.95
) -> Estimate:
    """Inverse-propensity estimate ``mean(w_i r_i)``; unbiased when the log has support.

    Parameters
    ----------
    rewards : (n,) reward observed on each logged row.
    weights : (n,) importance weights ``pi(a_i|x_i) / mu(a_i|x_i)`` (see
        :func:`~service.offpolicy.importance_weights`).
    confidence : level of the two-sided interval.

    References
    ----------
    Horvitz, D. G. & Thompson, D. J. (1952). A generalization of sampling without
    replacement from a finite universe. JASA 47(260), 663-685.
    """
    return mean_with_interval(weights * rewards, "ips", confidence)


def snips_estimate(
    rewards: FloatArray, weights: FloatArray, *, confidence: float = 0.95
) -> Estimate:
    """Self-normalised IPS ``sum(w r) / sum(w)`` with a delta-method interval.

    Slightly biased but usually far less variable than IPS; its variance is
    ``sum((w_i (r_i - V))^2) / (sum w)^2``. NaN when every weight is 0 (the target
    never agrees with the log).

    References
    ----------
    Swaminathan, A. & Joachims, T. (2015). The self-normalized estimator for
    counterfactual learning. NeurIPS 28. Hesterberg, T. (1995). Weighted average
    importance sampling and defensive mixture distributions. Technometrics 37(2).
    """
    n = len(rewards)
    if n < 2:
        raise DataError(f"snips: {n} row(s) given; at least 2 are needed for an interval.")
    total = float(weights.sum())
    if total <= 0:
        return Estimate("snips", math.nan, math.nan, math.nan, math.nan, confidence, n)
    value = float(weights @ rewards) / total
    residual = weights * (rewards - value)
    se = math.sqrt(float(residual @ residual)) / total
    return _estimate("snips", value, se, confidence, n)


def dr_estimate(
    rewards: FloatArray,
    weights: FloatArray,
    target_probs: FloatArray,
    reward_model: FloatArray,
    logged_action: IntArray,
    *,
    confidence: float = 0.95,
) -> Estimate:
    """Doubly robust estimate: the reward model's value plus an IPS correction of its error.

    Per row: ``sum_a pi(a|x_i) q(x_i, a) + w_i (r_i - q(x_i, a_i))``. Unbiased when either
    the logged propensities or the reward model ``q`` are correct.

    Parameters
    ----------
    rewards, weights : (n,) as for :func:`ips_estimate`.
    target_probs : (n, n_actions) action probabilities of the target policy.
    reward_model : (n, n_actions) predicted reward of each action for each row; it
        should not be fitted on the rewards being evaluated.
    logged_action : (n,) index of the logged action.
    confidence : level of the two-sided interval.

    References
    ----------
    Dudík, M., Langford, J. & Li, L. (2011). Doubly robust policy evaluation and
    learning. Proceedings of the 28th ICML, 1097-1104.
    """
    rows = np.arange(len(rewards))
    direct = (target_probs * reward_model).sum(axis=1)
    terms = direct + weights * (rewards - reward_model[rows, logged_action])
    return mean_with_interval(terms, "dr", confidence)
