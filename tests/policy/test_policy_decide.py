"""Decisions: hand-computed EV / action / do-not-contact, and the exact law of the action."""

from __future__ import annotations

import numpy as np
import pytest
from scipy import stats

from service.errors import DataError, PolicyError
from service.policy import (
    REASONS,
    DecisionBatch,
    Draws,
    decide,
    two_sided_level,
    uniform_draws,
)

COSTS = np.array([0.40, 3.50])  # email, call (the demo campaign's costs)
VALUE = 40.0


def _fixed_draws(n: int, explore: float = 0.5, arm: float = 0.5, holdout: float = 0.5) -> Draws:
    return Draws(np.full(n, explore), np.full(n, arm), np.full(n, holdout))


def _decide(
    tau: list[list[float]],
    high: list[list[float]],
    *,
    values: float | list[float] = VALUE,
    opted_out: list[bool] | None = None,
    draws: Draws | None = None,
    exploration: float = 0.0,
    holdout: float = 0.0,
    margin: float = 0.0,
) -> DecisionBatch:
    t, h = np.array(tau), np.array(high)
    n = len(t)
    return decide(
        t,
        t - (h - t),
        h,
        np.full(n, 0.5),
        np.asarray(values, dtype=float),
        COSTS,
        np.array(opted_out if opted_out is not None else [False] * n),
        draws if draws is not None else _fixed_draws(n),
        exploration=exploration,
        holdout=holdout,
        margin=margin,
    )


def test_hand_computed_expected_values_actions_and_flags() -> None:
    batch = _decide(
        tau=[
            [0.05, 0.12],  # A
            [0.005, 0.05],  # C
            [-0.10, -0.20],  # D: sleeping dog
            [-0.10, 0.0],  # E: negative but noisy
            [-0.08, 0.15],  # G: email flagged only
        ],
        high=[
            [0.07, 0.14],
            [0.03, 0.09],
            [-0.03, -0.05],
            [0.05, 0.04],
            [-0.01, 0.20],
        ],
    )
    # A: EV_email = 40*0.05 - 0.40 = 1.60; EV_call = 40*0.12 - 3.50 = 1.30 -> email.
    # C: EV_email = 40*0.005 - 0.40 = -0.20; EV_call = 40*0.05 - 3.50 = -1.50 -> none.
    # D: both upper bounds (-0.03, -0.05) < 0 -> both arms flagged -> do not contact.
    # E: tau_email = -0.10 but its upper bound 0.05 >= 0: not flagged; EVs -4.40, -3.50.
    # G: email's upper bound -0.01 < 0 flags it; EV_call = 40*0.15 - 3.50 = 2.50 -> call.
    expected_ev = [[1.60, 1.30], [-0.20, -1.50], [-4.40, -11.50], [-4.40, -3.50], [-3.60, 2.50]]
    np.testing.assert_allclose(batch.ev_per_arm, expected_ev, atol=1e-12)
    assert batch.action.tolist() == [1, 0, 0, 0, 2]
    np.testing.assert_allclose(batch.expected_value, [1.60, 0.0, 0.0, 0.0, 2.50], atol=1e-12)
    assert batch.dnc_per_arm.tolist() == [
        [False, False],
        [False, False],
        [True, True],
        [False, False],
        [True, False],
    ]
    assert batch.do_not_contact.tolist() == [False, False, True, False, False]
    assert batch.reasons == [
        ["best_ev"],
        ["no_positive_value"],
        ["do_not_contact"],
        ["no_positive_value"],
        ["partial_do_not_contact", "best_ev"],
    ]
    # Without exploration or holdout every action is certain.
    np.testing.assert_array_equal(batch.propensity, np.ones(5))
    # Outcome with the chosen arm: mu0 + tau (0.5 + 0.05 for A, 0.5 + 0.15 for G).
    np.testing.assert_allclose(batch.outcome_chosen, [0.55, 0.5, 0.5, 0.5, 0.65])


def test_margin_makes_the_flag_stricter() -> None:
    # D again with margin 0.05: email's bound -0.03 is not < -0.05, and call's -0.05 is not
    # strictly below -0.05, so neither arm is flagged.
    batch = _decide([[-0.10, -0.20]], [[-0.03, -0.05]], margin=0.05)
    assert not batch.dnc_per_arm.any() and not batch.do_not_contact[0]
    assert batch.reasons == [["no_positive_value"]]


def test_per_customer_value_overrides_change_the_choice() -> None:
    # C with value 100: EV_email = 100*0.005 - 0.40 = 0.10; EV_call = 100*0.05 - 3.50 = 1.50.
    batch = _decide([[0.005, 0.05]] * 2, [[0.03, 0.09]] * 2, values=[40.0, 100.0])
    assert batch.action.tolist() == [0, 2]
    np.testing.assert_allclose(batch.ev_per_arm[1], [0.10, 1.50], atol=1e-12)


def test_hand_computed_propensities_with_exploration_and_holdout() -> None:
    eps, h = 0.1, 0.2
    tau, high = (
        [[0.05, 0.12], [-0.08, 0.15], [-0.10, -0.20]],
        [
            [0.07, 0.14],
            [-0.01, 0.20],
            [-0.03, -0.05],
        ],
    )
    batch = _decide(tau, high, exploration=eps, holdout=h)
    # A: options none/email/call (m = 3), greedy email:
    #   p = (0.1/3, 0.9 + 0.1/3, 0.1/3) = (0.0333, 0.9333, 0.0333)
    #   final: email 0.8*0.9333 = 0.74667, call 0.8*0.0333 = 0.02667,
    #          none 0.0333 + 0.2*0.9667 = 0.22667.
    # G: options none/call (m = 2), greedy call: p = (0.05, 0.95);
    #   final: call 0.8*0.95 = 0.76, none 0.05 + 0.2*0.95 = 0.24.
    # D: only "none" is an option: probability 1.
    expected = [
        [0.1 / 3 + 0.2 * (1 - 0.1 / 3), 0.8 * (0.9 + 0.1 / 3), 0.8 * 0.1 / 3],
        [0.24, 0.0, 0.76],
        [1.0, 0.0, 0.0],
    ]
    np.testing.assert_allclose(batch.action_probs, expected, atol=1e-12)
    np.testing.assert_allclose(batch.action_probs[0], [0.226667, 0.746667, 0.026667], atol=1e-6)
    np.testing.assert_allclose(batch.propensity, [0.746667, 0.76, 1.0], atol=1e-6)


def test_forced_draws_explore_then_hold_out() -> None:
    tau, high = [[0.05, 0.12]] * 3, [[0.07, 0.14]] * 3
    draws = Draws(
        explore=np.array([0.01, 0.01, 0.5]),  # rows 0 and 1 explore (0.01 < 0.1)
        # m = 3 options: slot floor(3 * 0.7) = 2 -> call; floor(3 * 0.1) = 0 -> none.
        arm=np.array([0.7, 0.1, 0.5]),
        holdout=np.array([0.5, 0.5, 0.1]),  # row 2: 0.1 < 0.2 -> email withheld
    )
    batch = _decide(tau, high, draws=draws, exploration=0.1, holdout=0.2)
    assert batch.chosen.tolist() == [2, 0, 1]
    assert batch.action.tolist() == [2, 0, 0]
    assert batch.explored.tolist() == [True, True, False]
    assert batch.holdout.tolist() == [False, False, True]
    # call: 0.8*0.1/3; none: 0.1/3 + 0.2*(1 - 0.1/3) (rows 1 and 2 alike).
    none = 0.1 / 3 + 0.2 * (1 - 0.1 / 3)
    np.testing.assert_allclose(batch.propensity, [0.8 * 0.1 / 3, none, none], atol=1e-12)
    assert batch.reasons[0] == ["best_ev", "explored"]
    assert batch.reasons[2] == ["best_ev", "holdout"]
    assert set(code for row in batch.reasons for code in row) <= set(REASONS)


def _random_batch(n: int, seed: int, exploration: float, holdout: float) -> DecisionBatch:
    rng = np.random.default_rng(seed)
    tau = rng.normal(0.0, 0.08, size=(n, 2))
    high = tau + rng.uniform(0.0, 0.1, size=(n, 2))
    ids = [f"LTC-{i:06d}" for i in range(n)]
    return decide(
        tau,
        tau - 0.05,
        high,
        np.full(n, 0.4),
        VALUE,
        COSTS,
        rng.random(n) < 0.05,
        uniform_draws("salt", "winter", ids),
        exploration=exploration,
        holdout=holdout,
        margin=0.0,
    )


def test_action_probabilities_sum_to_one_over_possible_actions() -> None:
    batch = _random_batch(5000, seed=1, exploration=0.05, holdout=0.1)
    np.testing.assert_allclose(batch.action_probs.sum(axis=1), 1.0, atol=1e-12)
    np.testing.assert_allclose(batch.choice_probs.sum(axis=1), 1.0, atol=1e-12)
    # Flagged arms and every arm of an opted-out customer are impossible actions.
    impossible = ~batch.allowed
    assert (batch.action_probs[:, 1:][impossible] == 0).all()
    rows = np.arange(len(batch))
    np.testing.assert_array_equal(batch.propensity, batch.action_probs[rows, batch.action])
    assert (batch.propensity > 0).all()


def test_exploration_share_is_within_its_binomial_interval_over_100k_ids() -> None:
    n, eps = 100_000, 0.05
    batch = _random_batch(n, seed=2, exploration=eps, holdout=0.1)
    eligible = (1 + batch.allowed.sum(axis=1)) > 1  # customers who have a choice at all
    k = int(batch.explored[eligible].sum())
    # Reference: scipy.stats.binom.interval, the central 99% range of Binomial(n, eps).
    low, high = stats.binom.interval(0.99, int(eligible.sum()), eps)
    assert low <= k <= high
    # Holdout share among chosen contacts, same reference.
    contacts = batch.chosen > 0
    low, high = stats.binom.interval(0.99, int(contacts.sum()), 0.1)
    assert low <= int(batch.holdout[contacts].sum()) <= high


def test_empirical_action_frequencies_match_action_probs() -> None:
    # 100,000 ids in three fixed profiles; within a profile every id has the same law.
    n = 100_000
    profiles = np.array([[0.05, 0.12], [-0.08, 0.15], [0.005, 0.05]])
    bounds = profiles + np.array([[0.02, 0.02], [0.07, 0.05], [0.025, 0.04]])
    which = np.arange(n) % 3
    ids = [f"id-{i}" for i in range(n)]
    batch = decide(
        profiles[which],
        profiles[which] - 0.05,
        bounds[which],
        np.zeros(n),
        VALUE,
        COSTS,
        np.zeros(n, dtype=bool),
        uniform_draws("freq", "winter", ids),
        exploration=0.3,
        holdout=0.25,
        margin=0.0,
    )
    for profile in range(3):
        rows = which == profile
        probs = batch.action_probs[rows][0]
        counts = np.bincount(batch.action[rows], minlength=3)
        possible = probs > 0
        assert counts[~possible].sum() == 0
        # Reference: scipy.stats.chisquare goodness of fit; alpha 0.001.
        test = stats.chisquare(counts[possible], rows.sum() * probs[possible])
        assert test.pvalue > 0.001, (profile, counts, probs)


def test_opted_out_customers_are_never_contacted_even_when_explored() -> None:
    n = 20_000
    batch = _decide(
        [[0.5, 0.5]] * n,
        [[0.6, 0.6]] * n,
        opted_out=[True] * n,
        draws=uniform_draws("s", "c", range(n)),
        exploration=0.99,
        holdout=0.0,
    )
    assert (batch.action == 0).all() and (batch.chosen == 0).all()
    assert not batch.explored.any()
    np.testing.assert_array_equal(batch.propensity, 1.0)
    assert all(reasons == ["opted_out"] for reasons in batch.reasons)


def test_retried_decisions_are_identical() -> None:
    first = _random_batch(2000, seed=3, exploration=0.2, holdout=0.2)
    again = _random_batch(2000, seed=3, exploration=0.2, holdout=0.2)
    for name in ("action", "propensity", "explored", "holdout", "action_probs"):
        np.testing.assert_array_equal(getattr(first, name), getattr(again, name))
    assert first.reasons == again.reasons


def test_two_sided_level_puts_the_upper_bound_at_the_one_sided_confidence() -> None:
    assert two_sided_level(0.90) == pytest.approx(0.80)
    # Reference: scipy.stats.norm; the upper end of a two-sided 0.80 normal interval is the
    # 0.90 quantile.
    assert stats.norm.ppf(0.5 + two_sided_level(0.90) / 2) == pytest.approx(stats.norm.ppf(0.90))
    with pytest.raises(PolicyError, match=r"confidence=0.5 must lie in \(0.5, 1\)"):
        two_sided_level(0.5)


def test_invalid_inputs_are_rejected() -> None:
    with pytest.raises(PolicyError, match=r"exploration=1.0 must lie in \[0, 1\)"):
        _decide([[0.1, 0.1]], [[0.2, 0.2]], exploration=1.0)
    with pytest.raises(DataError, match=r"tau holds NaN"):
        _decide([[np.nan, 0.1]], [[0.2, 0.2]])
    with pytest.raises(DataError, match=r"high has shape"):
        decide(
            np.zeros((2, 2)),
            np.zeros((2, 2)),
            np.zeros((2, 1)),
            np.zeros(2),
            1.0,
            COSTS,
            np.zeros(2, dtype=bool),
            _fixed_draws(2),
            exploration=0.0,
            holdout=0.0,
            margin=0.0,
        )
