"""Evaluate one target policy on a log: IPS, SNIPS and DR side by side, ESS and support."""

from __future__ import annotations

import warnings
from dataclasses import dataclass, field
from typing import Any

import numpy as np
import numpy.typing as npt

from service.errors import DataError, OverlapWarning
from service.offpolicy.estimators import (
    Estimate,
    dr_estimate,
    ips_estimate,
    snips_estimate,
)
from service.offpolicy.support import Support, check_support
from service.offpolicy.weights import effective_sample_size, importance_weights

__all__ = ["OffPolicyEvaluation", "evaluate_policy"]

FloatArray = npt.NDArray[np.float64]


@dataclass(frozen=True)
class OffPolicyEvaluation:
    """The value of one target policy estimated three ways on the same logged rows.

    ``dr`` is None when no reward model was given. ``ess`` is Kish's effective sample
    size of the importance weights; ``warnings`` holds sentences about support and
    weight concentration.
    """

    ips: Estimate
    snips: Estimate
    dr: Estimate | None
    ess: float
    n: int
    support: Support
    warnings: list[str] = field(default_factory=list)

    def estimates(self) -> list[Estimate]:
        """The estimates present, IPS first."""
        return [e for e in (self.ips, self.snips, self.dr) if e is not None]

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready fields."""
        return {
            "n": self.n,
            "ess": self.ess,
            "estimates": {e.method: e.to_dict() for e in self.estimates()},
            "support": {
                "ok": self.support.ok,
                "unsupported_rows": self.support.unsupported_rows,
                "unsupported_mass": self.support.unsupported_mass,
            },
            "warnings": list(self.warnings),
        }


# Common practice, no source: an effective sample size below 10% of the rows means a few
# large weights carry the estimate, so its interval deserves little trust.
LOW_ESS_SHARE = 0.10


def evaluate_policy(
    target_probs: npt.ArrayLike,
    logged_action: npt.ArrayLike,
    logged_probs: npt.ArrayLike,
    rewards: npt.ArrayLike,
    *,
    reward_model: npt.ArrayLike | None = None,
    confidence: float = 0.95,
    warn: bool = True,
) -> OffPolicyEvaluation:
    """Value of a target policy on logged rows by IPS, SNIPS and (given ``q``) DR.

    Parameters
    ----------
    target_probs : (n, n_actions) probability the target policy gives each action on
        each logged row (one-hot for a deterministic policy, see ``one_hot``).
    logged_action : (n,) index of the action the logging policy took.
    logged_probs : (n, n_actions) the logging policy's full action distribution on each
        row (the log's ``action_probs``), so that support can be checked.
    rewards : (n,) observed reward of each row.
    reward_model : (n, n_actions), optional predicted reward of every action, for DR.
    confidence : level of the two-sided intervals.
    warn : also issue an :class:`~service.errors.OverlapWarning` for each warning.

    References
    ----------
    Horvitz & Thompson (1952), JASA 47(260) (IPS); Swaminathan & Joachims (2015),
    NeurIPS 28 (SNIPS); Dudík, Langford & Li (2011), ICML (DR); Kish (1965), *Survey
    Sampling* (effective sample size).
    """
    target, action, logged, reward, model = _check(
        target_probs, logged_action, logged_probs, rewards, reward_model
    )
    weights = importance_weights(target, action, logged)
    support = check_support(target, logged)
    ess = effective_sample_size(weights)
    notes = [] if support.message is None else [support.message]
    if ess < LOW_ESS_SHARE * len(reward):
        notes.append(
            f"The effective sample size is {ess:.0f} of {len(reward)} rows: few logged "
            "decisions agree with this policy, so its estimates rest on a small, heavily "
            "weighted subset. Log more decisions (or more exploration) before relying on them."
        )
    if warn:
        for note in notes:
            warnings.warn(note, OverlapWarning, stacklevel=2)
    dr = None
    if model is not None:
        dr = dr_estimate(reward, weights, target, model, action, confidence=confidence)
    return OffPolicyEvaluation(
        ips=ips_estimate(reward, weights, confidence=confidence),
        snips=snips_estimate(reward, weights, confidence=confidence),
        dr=dr,
        ess=ess,
        n=len(reward),
        support=support,
        warnings=notes,
    )


def _matrix(name: str, values: npt.ArrayLike, shape: tuple[int, int]) -> FloatArray:
    array = np.asarray(values, dtype=np.float64)
    if array.shape != shape:
        raise DataError(f"{name} has shape {array.shape}; it must have shape {shape}.")
    if not np.isfinite(array).all():
        raise DataError(f"{name} holds NaN or infinite values; only finite numbers are allowed.")
    return array


def _check(
    target_probs: npt.ArrayLike,
    logged_action: npt.ArrayLike,
    logged_probs: npt.ArrayLike,
    rewards: npt.ArrayLike,
    reward_model: npt.ArrayLike | None,
) -> tuple[FloatArray, npt.NDArray[np.intp], FloatArray, FloatArray, FloatArray | None]:
    reward = np.asarray(rewards, dtype=np.float64)
    if reward.ndim != 1 or not np.isfinite(reward).all():
        raise DataError("rewards must be a 1-d array of finite numbers, one per logged row.")
    n = len(reward)
    logged = _matrix("logged_probs", logged_probs, (n, np.shape(logged_probs)[-1]))
    k = logged.shape[1]
    target = _matrix("target_probs", target_probs, (n, k))
    for name, probs in (("target_probs", target), ("logged_probs", logged)):
        if (probs < 0).any() or not np.allclose(probs.sum(axis=1), 1.0, atol=1e-6):
            raise DataError(f"Each row of {name} must hold probabilities that sum to 1.")
    action = np.asarray(logged_action)
    if action.shape != (n,) or not np.issubdtype(action.dtype, np.integer):
        raise DataError(f"logged_action must be {n} integer action indices.")
    if n and (action.min() < 0 or action.max() >= k):
        raise DataError(f"logged_action holds indices outside [0, {k}).")
    model = None if reward_model is None else _matrix("reward_model", reward_model, (n, k))
    return target, action.astype(np.intp), logged, reward, model
