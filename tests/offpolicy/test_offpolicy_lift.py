"""Realized lift: statsmodels references, a hand-computed example, coverage of the truth."""

from __future__ import annotations

import numpy as np
import pytest
from offpolicy_sim import COSTS, VALUE, logged_run
from statsmodels.stats.proportion import confint_proportions_2indep
from statsmodels.stats.weightstats import CompareMeans, DescrStatsW

from service.errors import DataError
from service.offpolicy import realized_lift, two_sample_difference

LABELS = ["none", "email", "call"]


def _lift(run, **kw):
    return realized_lift(
        run.y, run.action, run.probs, run.holdout, value=VALUE, costs=COSTS, labels=LABELS, **kw
    )


def test_targeted_difference_matches_statsmodels_wald_interval(run) -> None:
    result = _lift(run)
    t = result.targeted
    assert t is not None
    contacted, held = run.action > 0, run.holdout
    # Reference: statsmodels Wald interval for a difference of two independent proportions.
    low, high = confint_proportions_2indep(
        int(run.y[contacted].sum()), int(contacted.sum()),
        int(run.y[held].sum()), int(held.sum()), method="wald", compare="diff",
    )  # fmt: skip
    assert (t.difference.low, t.difference.high) == pytest.approx((low, high), rel=1e-9)
    assert t.n_contacted == contacted.sum() and t.n_holdout == held.sum()
    # Incremental renewals = lift per contact x contacts; profit subtracts what they cost.
    assert t.incremental_outcome.value == pytest.approx(t.difference.value * t.n_contacted)
    spent = float(np.concatenate([[0.0], COSTS])[run.action].sum())
    assert t.contact_cost == pytest.approx(spent)
    expected = VALUE * t.difference.value * t.n_contacted - spent
    assert t.incremental_profit.value == pytest.approx(expected)
    assert t.incremental_profit.high - t.incremental_profit.low == pytest.approx(
        VALUE * t.n_contacted * (high - low)
    )


def test_welch_interval_for_amounts_matches_statsmodels() -> None:
    rng = np.random.default_rng(3)
    a, b = rng.gamma(2.0, 10.0, 300), rng.gamma(2.0, 9.0, 200)
    est = two_sample_difference(a, b, binary=False)
    # Reference: statsmodels CompareMeans z interval with unequal variances.
    low, high = CompareMeans(DescrStatsW(a), DescrStatsW(b)).zconfint_diff(usevar="unequal")
    assert (est.low, est.high) == pytest.approx((low, high), rel=1e-9)


def test_hand_computed_policy_lift_against_no_contact() -> None:
    # Six decisions over one arm (cost 1, value 10).
    #   row  action  P(none)  y   no-contact term 1{none} y / P(none)
    #   0    arm     0.2      1   0
    #   1    arm     0.2      0   0
    #   2    none    0.2      1   5      (held out)
    #   3    none    0.5      0   0
    #   4    none    0.5      1   2
    #   5    arm     0.5      1   0
    # observed mean = 4/6; no-contact IPS = 7/6; lift = -3/6 per decision.
    y = np.array([1.0, 0, 1, 0, 1, 1])
    action = np.array([1, 1, 0, 0, 0, 1])
    p_none = np.array([0.2, 0.2, 0.2, 0.5, 0.5, 0.5])
    probs = np.column_stack([p_none, 1 - p_none])
    held = np.array([False, False, True, False, False, False])
    result = realized_lift(
        y, action, probs, held, value=10.0, costs=[1.0], labels=["none", "letter"]
    )
    assert result.policy_outcome.value == pytest.approx(4 / 6)
    assert result.alternatives["none"].outcome.ips.value == pytest.approx(7 / 6)
    assert result.lift.value == pytest.approx(-3 / 6)
    assert result.incremental_outcome.value == pytest.approx(-3.0)
    # net per row: 10 y - cost = (9, -1, 10, 0, 10, 9); minus 10 x no-contact terms
    # (0, 0, 50, 0, 20, 0) -> (9, -1, -40, 0, -10, 9), mean -33/6.
    assert result.profit_lift.value == pytest.approx(-33 / 6)
    # "Everyone by letter": IPS weights 1/P(letter) = 1.25, 1.25, 2 on rows 0, 1, 5.
    assert result.alternatives["letter"].outcome.ips.value == pytest.approx((1.25 + 2) / 6)
    assert result.targeted is None and any("at least 2" in w for w in result.warnings)


def test_intervals_cover_the_simulated_true_lift() -> None:
    # Truth per log: the targeted lift is the mean true uplift of the chosen arm over the
    # customers the policy chose to contact; the policy lift is sum_a P(a) tau_a averaged
    # over all decisions. Nominal coverage 95%; 120 logs.
    reps = 120
    hits = {"targeted": 0, "policy": 0}
    for seed in range(reps):
        run = logged_run(5000 + seed, n=2000)
        result = _lift(run)
        tau = run.expected - run.expected[:, :1]
        targeted = run.chosen > 0
        true_targeted = tau[np.arange(len(tau)), run.chosen][targeted].mean()
        true_policy = (run.probs * tau).sum(axis=1).mean()
        assert result.targeted is not None
        d = result.targeted.difference
        hits["targeted"] += d.low <= true_targeted <= d.high
        hits["policy"] += result.lift.low <= true_policy <= result.lift.high
    coverage = {k: v / reps for k, v in hits.items()}
    # 120 draws: a true 95% coverage falls below 0.88 with probability < 0.5%.
    assert min(coverage.values()) >= 0.88, coverage


def test_alternatives_and_best_arm(run) -> None:
    result = _lift(run, reward_model=run.q)
    assert set(result.alternatives) == set(LABELS)
    assert result.alternatives["email"].outcome.dr is not None
    # Truth: in the simulation email beats call on net value for the population.
    net = VALUE * run.expected - np.concatenate([[0.0], COSTS])
    assert result.best_arm == LABELS[1 + int(np.argmax(net[:, 1:].mean(axis=0)))]


def test_inconsistent_input_is_refused() -> None:
    with pytest.raises(DataError, match="held-out row has action 0"):
        realized_lift(
            [1.0, 0.0], [1, 1], [[0.5, 0.5]] * 2, [True, False], value=1, costs=[0.0],
            labels=["none", "a"],
        )  # fmt: skip
    with pytest.raises(DataError, match="at least 2"):
        realized_lift(
            [1.0], [1], [[0.5, 0.5]], [False], value=1, costs=[0.0], labels=["none", "a"]
        )
