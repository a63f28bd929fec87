"""Importance weights of a target policy against a logged one, and Kish's effective size."""

from __future__ import annotations

import numpy as np
import numpy.typing as npt

from service.errors import DataError

__all__ = ["effective_sample_size", "importance_weights", "one_hot"]

FloatArray = npt.NDArray[np.float64]
IntArray = npt.NDArray[np.intp]


def one_hot(actions: npt.ArrayLike, n_actions: int) -> FloatArray:
    """The (n, n_actions) probability matrix of a deterministic policy that takes ``actions``."""
    index = np.asarray(actions, dtype=np.intp)
    if index.ndim != 1 or (len(index) and (index.min() < 0 or index.max() >= n_actions)):
        raise DataError(
            f"actions must be a 1-d array of integers in [0, {n_actions}); got shape "
            f"{index.shape} with values outside that range."
        )
    probs = np.zeros((len(index), n_actions))
    probs[np.arange(len(index)), index] = 1.0
    return probs


def importance_weights(
    target_probs: FloatArray, logged_action: IntArray, logged_probs: FloatArray
) -> FloatArray:
    """``w_i = pi(a_i | x_i) / mu(a_i | x_i)``: target over logged probability of the action taken.

    Rows whose logged action had probability 0 cannot occur in a correct log; they are
    refused rather than given an infinite weight.

    References
    ----------
    Horvitz, D. G. & Thompson, D. J. (1952). A generalization of sampling without
    replacement from a finite universe. JASA 47(260), 663-685.
    """
    rows = np.arange(len(logged_action))
    logged = logged_probs[rows, logged_action]
    if not (logged > 0).all():
        bad = int(np.flatnonzero(~(logged > 0))[0])
        raise DataError(
            f"Row {bad} logged an action whose logged probability is {logged[bad]!r}; every "
            "logged action must have a probability > 0. The log is damaged."
        )
    weights: FloatArray = target_probs[rows, logged_action] / logged
    return weights


def effective_sample_size(weights: npt.ArrayLike) -> float:
    """Kish's effective sample size ``(sum w)^2 / sum w^2`` (0 when every weight is 0).

    It is the number of equally weighted rows that would give a weighted mean the same
    variance; far below the row count, a few large weights carry the estimate.

    References
    ----------
    Kish, L. (1965). *Survey Sampling*. Wiley, New York (section 11.7).
    """
    w = np.asarray(weights, dtype=np.float64)
    squares = float(w @ w)
    return float(w.sum()) ** 2 / squares if squares > 0 else 0.0
