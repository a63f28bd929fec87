"""Simulated logs for the off-policy tests: an epsilon-greedy policy with holdout run on
Larkspur Tea Club customers (invented demo data), the truth alongside."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from service.policy import decide
from service.simulation import simulate

VALUE = 40.0
COSTS = np.array([0.40, 3.50])  # email, call: the demo campaign's costs


@dataclass(frozen=True)
class LoggedRun:
    action: np.ndarray  # 0 none, 1 email, 2 call
    chosen: np.ndarray  # action before holdout
    probs: np.ndarray  # (n, 3) exact law of the action
    holdout: np.ndarray
    y: np.ndarray
    expected: np.ndarray  # (n, 3) true mean outcome under each action
    q: np.ndarray  # (n, 3) a deliberately imperfect outcome model
    noisy_tau: np.ndarray


def logged_run(
    seed: int, n: int = 3000, exploration: float = 0.2, holdout: float = 0.2
) -> LoggedRun:
    """Larkspur customers decided by a noisy model, outcomes drawn from the true law."""
    # Not default_rng(seed): simulate() draws from that stream, and reusing it would tie
    # the exploration draws to the customers' features.
    rng = np.random.default_rng((seed, 1))
    camp = simulate("larkspur", n, random_state=seed)
    noisy_tau = camp.tau + rng.normal(0.0, 0.05, camp.tau.shape)
    batch = decide(
        noisy_tau,
        noisy_tau - 0.1,
        noisy_tau + 0.1,
        camp.mu0,
        VALUE,
        COSTS,
        np.zeros(n, dtype=bool),
        (rng.random(n), rng.random(n), rng.random(n)),
        exploration=exploration,
        holdout=holdout,
        margin=0.0,
    )
    expected = camp.expected_outcomes()
    rows = np.arange(n)
    y = (rng.random(n) < expected[rows, batch.action]).astype(float)
    q = np.clip(expected + rng.normal(0.0, 0.05, expected.shape) + 0.03, 0.0, 1.0)
    return LoggedRun(
        batch.action, batch.chosen, batch.action_probs, batch.holdout, y, expected, q, noisy_tau
    )
