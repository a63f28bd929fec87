"""Ranked contact lists: order, capacity and budget cuts, reasons, holdout, propensities."""

from __future__ import annotations

import numpy as np
import pytest
from scipy import stats

from service.errors import DataError
from service.policy import EXCLUSION_REASONS, DecisionBatch, Draws, decide, rank, uniform_draws

COSTS = np.array([0.40, 3.50])  # email, call
IDS = ["A", "B", "C", "OPT", "DOG", "LOW", "D"]


def _hand_batch(exploration: float = 0.0, holdout: float = 0.0, draws: Draws | None = None):
    tau = np.array(
        [
            [0.05, 0.12],  # A: EV email 40*0.05-0.40 = 1.60, call 40*0.12-3.50 = 1.30
            [0.0, 0.15],  # B: EV email -0.40, call 40*0.15-3.50 = 2.50
            [0.03, 0.0],  # C: EV email 40*0.03-0.40 = 0.80, call -3.50
            [0.5, 0.5],  # OPT: opted out
            [-0.2, -0.2],  # DOG: upper bounds below 0 -> do not contact
            [0.005, 0.05],  # LOW: EV email -0.20, call -1.50
            [0.02, 0.0],  # D: EV email 40*0.02-0.40 = 0.40
        ]
    )
    high = tau + 0.05
    n = len(tau)
    return decide(
        tau,
        tau - 0.05,
        high,
        np.full(n, 0.3),
        40.0,
        COSTS,
        np.array([False, False, False, True, False, False, False]),
        draws if draws is not None else Draws(*(np.full(n, 0.5) for _ in range(3))),
        exploration=exploration,
        holdout=holdout,
        margin=0.0,
    )


def test_capacity_keeps_the_best_expected_values() -> None:
    result = rank(_hand_batch(), IDS, capacity=2, costs=COSTS)
    # Contacts by EV: B (call, 2.50), A (email, 1.60), C (email, 0.80), D (email, 0.40).
    assert result.contact_ids == ["B", "A"]
    assert result.rank.tolist() == [2, 1, 0, 0, 0, 0, 0]
    assert result.arm.tolist() == [1, 2, 0, 0, 0, 0, 0]
    assert dict(zip(result.excluded_ids, result.excluded_reason, strict=True)) == {
        "C": "beyond_capacity",
        "OPT": "opted_out",
        "DOG": "do_not_contact",
        "LOW": "no_positive_value",
        "D": "beyond_capacity",
    }
    assert result.cut_expected_value == pytest.approx(1.60)
    assert result.spend == pytest.approx(3.50 + 0.40)


def test_budget_cuts_the_prefix_that_fits() -> None:
    batch = _hand_batch()
    # Running cost in EV order: 3.50, 3.90, 4.30, 4.70. A budget of 4.00 keeps B and A.
    result = rank(batch, IDS, budget=4.0, costs=COSTS)
    assert result.contact_ids == ["B", "A"]
    assert result.reason[2] == result.reason[6] == "beyond_budget"
    # With capacity 3 too, C (place 3) is cut by budget, D (place 4) lies beyond capacity.
    both = rank(batch, IDS, capacity=3, budget=4.0, costs=COSTS)
    assert (both.reason[2], both.reason[6]) == ("beyond_budget", "beyond_capacity")
    # A budget equal to the running sum keeps the row despite float rounding (3.5+0.4+0.4).
    exact = rank(batch, IDS, budget=4.3, costs=COSTS)
    assert exact.contact_ids == ["B", "A", "C"]
    # At 3.00 the EV prefix would list nobody (B's call, 3.50, comes first); pricing the
    # budget lists the three emails instead (see test_policy_budget.py).
    assert rank(batch, IDS, budget=3.0, costs=COSTS).contact_ids == ["A", "C", "D"]


def test_nothing_cut_keeps_the_decisions_of_decide() -> None:
    batch = _hand_batch(exploration=0.2, holdout=0.3)
    result = rank(batch, IDS, costs=COSTS)
    assert result.cut_expected_value is None
    np.testing.assert_array_equal(result.action, batch.action)
    np.testing.assert_allclose(result.action_probs, batch.action_probs, atol=1e-15)
    np.testing.assert_allclose(result.propensity, batch.propensity, atol=1e-15)


def test_hand_computed_propensities_given_the_cut() -> None:
    # eps = 0.3 with draws that keep the greedy action; holdout 0.5 withholds nobody here.
    result = rank(_hand_batch(exploration=0.3, holdout=0.5), IDS, capacity=2, costs=COSTS)
    # Cut after A (EV 1.60). A: options none/email/call, p = (0.1, 0.8, 0.1); call's EV 1.30
    # sorts after the cut, so P(email | cut) = 0.5*0.8 = 0.40, P(call | cut) = 0,
    # P(none | cut) = 0.60. B: email's EV -0.40 is after the cut: P(call | cut) = 0.5*0.8.
    # C and D lie beyond the cut: P(none | cut) = 1.
    np.testing.assert_allclose(result.action_probs[0], [0.60, 0.40, 0.0], atol=1e-12)
    np.testing.assert_allclose(result.action_probs[1], [0.60, 0.0, 0.40], atol=1e-12)
    np.testing.assert_allclose(result.action_probs[[2, 6]], [[1, 0, 0]] * 2, atol=1e-12)
    np.testing.assert_allclose(result.propensity[:3], [0.40, 0.40, 1.0], atol=1e-12)
    np.testing.assert_allclose(result.action_probs.sum(axis=1), 1.0, atol=1e-12)


def test_explored_to_no_contact_has_its_own_reason() -> None:
    n = len(IDS)
    # A explores (0.01 < 0.3) and u_arm 0.1 picks slot 0 of (none, email, call): none.
    draws = Draws(np.r_[0.01, np.full(n - 1, 0.5)], np.full(n, 0.1), np.full(n, 0.5))
    result = rank(_hand_batch(exploration=0.3, draws=draws), IDS, costs=COSTS)
    assert result.reason[0] == "explored" and result.explored[0]
    assert set(result.excluded_reason) <= set(EXCLUSION_REASONS)


def _random_batch(n: int, salt: str, exploration: float, holdout: float) -> DecisionBatch:
    rng = np.random.default_rng(11)  # same estimates for every salt
    tau = rng.normal(0.03, 0.05, size=(n, 2))
    ids = [f"LTC-{i:06d}" for i in range(n)]
    return decide(
        tau,
        tau - 0.04,
        tau + 0.04,
        np.full(n, 0.3),
        40.0,
        COSTS,
        np.arange(n) % 50 == 0,
        uniform_draws(salt, "winter", ids),
        exploration=exploration,
        holdout=holdout,
        margin=0.0,
    )


def test_holdout_within_the_list_is_marked_with_its_exact_probability() -> None:
    n, h = 40_000, 0.1
    batch = _random_batch(n, "holdout", exploration=0.05, holdout=h)
    result = rank(batch, list(range(n)), capacity=15_000, costs=COSTS)
    listed = result.listed
    assert listed.sum() == 15_000
    # Reference: scipy.stats.binom.interval, central 99% range of Binomial(listed, h).
    low, high = stats.binom.interval(0.99, int(listed.sum()), h)
    assert low <= int(result.holdout.sum()) <= high
    # A held-out row logs P(none | cut); a contacted row logs (1 - h) * p_arm.
    held = np.flatnonzero(result.holdout)
    np.testing.assert_array_equal(result.action[held], 0)
    np.testing.assert_allclose(result.propensity[held], result.action_probs[held, 0])
    shown = np.flatnonzero(listed & ~result.holdout)
    arm = result.arm[shown]
    np.testing.assert_allclose(
        result.propensity[shown], (1 - h) * batch.choice_probs[shown, arm], atol=1e-12
    )
    # The list is in EV order and never contains opted-out rows.
    assert np.all(np.diff(result.expected_value[result.order]) <= 0)
    assert not batch.opted_out[result.order].any()
    assert result.reserved <= 15_000 * 3.50


def test_logged_probabilities_given_the_cut_match_frequencies_over_salts() -> None:
    # Same estimates, 200 salts: the average of P(a | cut) must match how often a happens
    # (tower property; the cut moves with the salt). Bound: 4 binomial standard deviations.
    n, salts = 600, 200
    counts = np.zeros((n, 3))
    expected = np.zeros((n, 3))
    variance = np.zeros((n, 3))
    for s in range(salts):
        batch = _random_batch(n, f"s{s}", 0.2, 0.1)
        result = rank(batch, list(range(n)), capacity=200, costs=COSTS)
        counts[np.arange(n), result.action] += 1
        expected += result.action_probs
        variance += result.action_probs * (1 - result.action_probs)
    for action in range(3):
        gap = abs(counts[:, action].sum() - expected[:, action].sum())
        assert gap <= 4 * np.sqrt(variance[:, action].sum()), (action, gap)


def test_invalid_limits_are_rejected() -> None:
    batch = _hand_batch()
    with pytest.raises(DataError, match=r"capacity=-1 must be a whole number"):
        rank(batch, IDS, capacity=-1, costs=COSTS)
    with pytest.raises(DataError, match=r"budget=nan must be a finite number"):
        rank(batch, IDS, budget=float("nan"), costs=COSTS)
    with pytest.raises(DataError, match=r"ids has 2 entries for 7"):
        rank(batch, IDS[:2], costs=COSTS)
