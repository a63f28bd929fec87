"""IPS, SNIPS, DR and ESS: hand-computed values, statsmodels references, coverage."""

from __future__ import annotations

import math
import warnings

import numpy as np
import pytest
import statsmodels.api as sm
from offpolicy_sim import COSTS, VALUE, logged_run
from statsmodels.stats.weightstats import DescrStatsW

import service.offpolicy as offpolicy
from service.errors import DataError, OverlapWarning
from service.offpolicy import (
    check_support,
    compare_policies,
    dr_estimate,
    effective_sample_size,
    evaluate_policy,
    importance_weights,
    ips_estimate,
    one_hot,
    snips_estimate,
)

# Four logged rows, two actions; worked out by hand in the comments below.
LOGGED = np.array([[0.5, 0.5], [0.8, 0.2], [0.2, 0.8], [0.5, 0.5]])
ACTION = np.array([0, 1, 1, 0])
REWARD = np.array([1.0, 0.0, 1.0, 0.0])
TARGET = one_hot([0, 1, 0, 0], 2)
Q = np.array([[0.6, 0.4], [0.3, 0.5], [0.2, 0.7], [0.5, 0.5]])


def test_public_names_are_exported() -> None:
    assert sorted(offpolicy.__all__) == sorted(set(offpolicy.__all__))
    for name in offpolicy.__all__:
        assert hasattr(offpolicy, name)


def test_hand_computed_weights_ips_snips_dr_and_ess() -> None:
    w = importance_weights(TARGET, ACTION, LOGGED)
    # pi(a_i)/mu(a_i): 1/0.5, 1/0.2, 0 (target takes the other action), 1/0.5
    np.testing.assert_allclose(w, [2.0, 5.0, 0.0, 2.0])
    ips = ips_estimate(REWARD, w)
    assert ips.value == pytest.approx(0.5)  # (2*1 + 0 + 0 + 0) / 4
    # terms (2, 0, 0, 0): sample sd (ddof 1) = 1, so se = 1 / sqrt(4)
    assert ips.std_error == pytest.approx(0.5)
    assert ips.low == pytest.approx(0.5 - 1.959964 * 0.5, abs=1e-6)
    snips = snips_estimate(REWARD, w)
    assert snips.value == pytest.approx(2.0 / 9.0)  # sum(w r) / sum(w)
    # residuals w (r - 2/9) = (14/9, -10/9, 0, -4/9); se = sqrt(312) / 81
    assert snips.std_error == pytest.approx(math.sqrt(312.0) / 81.0)
    dr = dr_estimate(REWARD, w, TARGET, Q, ACTION)
    # direct (0.6, 0.5, 0.2, 0.5) + w (r - q(a_i)) = (0.8, -2.5, 0, -1) -> mean of
    # (1.4, -2.0, 0.2, -0.5) = -0.225
    assert dr.value == pytest.approx(-0.225)
    assert effective_sample_size(w) == pytest.approx(81.0 / 33.0)  # 9^2 / (4 + 25 + 4)


def test_ips_and_dr_intervals_match_statsmodels_mean_interval(run) -> None:
    target = one_hot(np.where(run.noisy_tau[:, 0] > 0.05, 1, 0), 3)
    w = importance_weights(target, run.action, run.probs)
    ips = ips_estimate(run.y, w)
    # Reference: statsmodels DescrStatsW z interval of the mean of the per-row terms.
    low, high = DescrStatsW(w * run.y).zconfint_mean(alpha=0.05)
    assert (ips.low, ips.high) == pytest.approx((low, high), rel=1e-9)
    dr = dr_estimate(run.y, w, target, run.q, run.action)
    terms = (target * run.q).sum(1) + w * (run.y - run.q[np.arange(len(w)), run.action])
    low, high = DescrStatsW(terms).zconfint_mean(alpha=0.05)
    assert (dr.low, dr.high) == pytest.approx((low, high), rel=1e-9)


def test_snips_delta_method_matches_weighted_least_squares_hc0(run) -> None:
    target = one_hot(np.where(run.noisy_tau[:, 1] > 0.08, 2, 0), 3)
    w = importance_weights(target, run.action, run.probs)
    snips = snips_estimate(run.y, w)
    # Reference: statsmodels WLS of the reward on a constant with weights w is the
    # self-normalised mean; its HC0 sandwich variance is the delta-method variance.
    keep = w > 0
    fit = sm.WLS(run.y[keep], np.ones(keep.sum()), weights=w[keep]).fit(cov_type="HC0")
    assert snips.value == pytest.approx(float(fit.params[0]), rel=1e-12)
    assert snips.std_error == pytest.approx(float(fit.bse[0]), rel=1e-9)


def test_on_policy_weights_reduce_to_the_plain_mean(run) -> None:
    # Evaluating the logging policy itself: IPS weights have mean ~1 and SNIPS is exactly
    # the observed mean reward.
    w = importance_weights(run.probs, run.action, run.probs)
    np.testing.assert_allclose(w, 1.0)
    assert snips_estimate(run.y, w).value == pytest.approx(run.y.mean())
    assert effective_sample_size(w) == pytest.approx(len(w))


def test_missing_support_is_reported_and_warned() -> None:
    logged = np.array([[1.0, 0.0], [0.5, 0.5], [0.5, 0.5]])
    target = one_hot([1, 1, 0], 2)
    support = check_support(target, logged)
    assert (support.unsupported_rows, support.ok) == (1, False)
    assert support.unsupported_mass == pytest.approx(1.0 / 3.0)
    assert "lacks support" in (support.message or "")
    with pytest.warns(OverlapWarning, match="lacks support"):
        result = evaluate_policy(target, [0, 1, 0], logged, [1.0, 0.0, 1.0])
    assert result.support.unsupported_rows == 1
    assert any("lacks support" in w for w in result.warnings)


def test_supported_policy_raises_no_warning(run) -> None:
    target = one_hot(np.zeros(len(run.y), dtype=int), 3)
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        result = evaluate_policy(target, run.action, run.probs, run.y, reward_model=run.q)
    assert result.support.ok and result.warnings == []
    assert result.dr is not None and result.ess > 0.05 * len(run.y)


def test_bad_input_is_refused_with_the_fix() -> None:
    with pytest.raises(DataError, match="sum to 1"):
        evaluate_policy(TARGET * 2, ACTION, LOGGED, REWARD)
    with pytest.raises(DataError, match="probability > 0"):
        importance_weights(TARGET, np.array([0, 1, 1, 0]), np.array([[1, 0.0]] * 4))
    with pytest.raises(DataError, match="at least 2"):
        ips_estimate(np.array([1.0]), np.array([1.0]))
    with pytest.raises(DataError, match="confidence"):
        ips_estimate(REWARD, np.ones(4), confidence=1.5)


def _true_value(run, target: np.ndarray) -> float:
    net = VALUE * run.expected - np.concatenate([[0.0], COSTS])
    return float((target * net).sum(axis=1).mean())


@pytest.mark.slow
def test_intervals_cover_the_true_policy_value_over_repeated_logs() -> None:
    # The true value of the target policy is known from the simulation's expected
    # outcomes (conditional on each log's customers); the nominal coverage is 95%.
    reps, hits = 200, {"ips": 0, "snips": 0, "dr": 0}
    for seed in range(reps):
        run = logged_run(1000 + seed, n=2000)
        # Target: a different model's greedy policy (email where its uplift > 0.1).
        target = one_hot(np.where(run.noisy_tau[:, 0] > 0.1, 1, 0), 3)
        net = VALUE * run.y - np.concatenate([[0.0], COSTS])[run.action]
        q_net = VALUE * run.q - np.concatenate([[0.0], COSTS])
        result = evaluate_policy(
            target, run.action, run.probs, net, reward_model=q_net, warn=False
        )
        truth = _true_value(run, target)
        for est in result.estimates():
            hits[est.method] += est.low <= truth <= est.high
    coverage = {k: v / reps for k, v in hits.items()}
    # 200 draws: a true 95% coverage falls below 0.90 with probability < 0.1%.
    assert min(coverage.values()) >= 0.90, coverage


def test_paired_difference_of_two_policies(run) -> None:
    a = one_hot(np.where(run.noisy_tau[:, 0] > 0.05, 1, 0), 3)
    b = one_hot(np.where(run.noisy_tau[:, 0] > 0.07, 1, 0), 3)
    diff = compare_policies(a, b, run.action, run.probs, run.y, reward_model=run.q)
    one = evaluate_policy(a, run.action, run.probs, run.y, reward_model=run.q, warn=False)
    two = evaluate_policy(b, run.action, run.probs, run.y, reward_model=run.q, warn=False)
    for method, x, y in (("ips", one.ips, two.ips), ("snips", one.snips, two.snips)):
        assert diff[method].value == pytest.approx(x.value - y.value)
        # The policies agree on most rows, so pairing narrows the interval a lot.
        assert diff[method].std_error < 0.8 * math.hypot(x.std_error, y.std_error)
    assert one.dr is not None and two.dr is not None
    assert diff["dr"].value == pytest.approx(one.dr.value - two.dr.value)
    same = compare_policies(a, a, run.action, run.probs, run.y, reward_model=run.q)
    assert all(e.value == 0.0 and e.std_error == 0.0 for e in same.values())
