"""Epsilon exploration and holdout: the random part of a decision and its exact law.

Actions are numbered 0 (no contact) and 1..K (arms). A customer's *options* are no
contact plus every allowed arm. All functions are pure and vectorised over customers.
"""

from __future__ import annotations

import numpy as np
import numpy.typing as npt

__all__ = ["choice_probabilities", "explore_pick", "final_probabilities"]

FloatArray = npt.NDArray[np.float64]
BoolArray = npt.NDArray[np.bool_]
IntArray = npt.NDArray[np.intp]


def _options(allowed: BoolArray) -> BoolArray:
    # Column 0 (no contact) is always an option.
    return np.column_stack([np.ones(len(allowed), dtype=bool), allowed])


def choice_probabilities(greedy: IntArray, allowed: BoolArray, exploration: float) -> FloatArray:
    """Law of the action before holdout: ``(1 - eps) * onehot(greedy) + eps / m`` on options.

    ``m`` is the number of options of the customer (1 + allowed arms); actions that are
    not options get probability 0. Shape (n, 1 + K); rows sum to one.

    References
    ----------
    Sutton & Barto (2018), *Reinforcement Learning: An Introduction*, 2nd ed., sec. 2.2
    (epsilon-greedy action selection).
    """
    options = _options(allowed)
    m = options.sum(axis=1, keepdims=True)
    probs: FloatArray = exploration * options / m
    probs[np.arange(len(greedy)), greedy] += 1.0 - exploration
    return probs


def explore_pick(allowed: BoolArray, u_arm: FloatArray) -> IntArray:
    """The option drawn by ``u_arm``: option ``floor(u_arm * m)`` in action order."""
    options = _options(allowed)
    m = options.sum(axis=1)
    slot = np.minimum((u_arm * m).astype(np.intp), m - 1)
    # Position of each action among the customer's options (0-based), -1 if not an option.
    position = np.where(options, np.cumsum(options, axis=1) - 1, -1)
    picks: IntArray = np.argmax(position == slot[:, None], axis=1).astype(np.intp)
    return picks


def final_probabilities(choice_probs: FloatArray, holdout: float) -> FloatArray:
    """Law of the final action after holdout withholds each chosen contact with prob h.

    ``P(a) = (1 - h) * p_a`` for arms; ``P(none) = p_none + h * sum_a p_a``.
    """
    final = choice_probs.copy()
    final[:, 1:] *= 1.0 - holdout
    final[:, 0] = choice_probs[:, 0] + holdout * choice_probs[:, 1:].sum(axis=1)
    return final
