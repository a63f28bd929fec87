"""Uplift at top k%: tie rule, and the interval against statsmodels."""

from __future__ import annotations

import numpy as np
import pytest
from causaldata import thornton_hiv
from statsmodels.stats.proportion import confint_proportions_2indep
from statsmodels.stats.weightstats import DescrStatsW

from service.evaluation import UpliftEstimate, uplift_at_top


def test_top_fraction_takes_whole_tie_groups(worked: dict[str, np.ndarray]) -> None:
    # 25% falls inside no group boundary: the smallest set of whole groups reaching it is
    # A, B, C (x = 0.3): treated A, C both respond, control B does not.
    top = uplift_at_top(**worked, fraction=0.25)
    assert top == UpliftEstimate(1.0, 1.0, 1.0, 2.0, 1.0, 0.3)
    # 40% needs the tied group D, E, F too (x = 0.6): treated 3/4, control 1/2.
    top = uplift_at_top(**worked, fraction=0.4)
    assert (top.estimate, top.n_treated, top.n_control, top.fraction) == (0.25, 4.0, 2.0, 0.6)


def test_top_fraction_exactly_at_a_boundary(worked: dict[str, np.ndarray]) -> None:
    assert uplift_at_top(**worked, fraction=0.3).fraction == 0.3
    assert uplift_at_top(**worked, fraction=0.2).fraction == 0.2
    assert uplift_at_top(**worked, fraction=1.0).fraction == 1.0


def test_interval_matches_statsmodels_wald_for_proportions(
    worked: dict[str, np.ndarray],
) -> None:
    top = uplift_at_top(**worked, fraction=0.7, confidence=0.9)
    # Reference: statsmodels confint_proportions_2indep, Wald interval for p1 - p0; the top
    # 70% (groups 1-4) holds treated A, C, E, F (3 of 4 respond) and control B, D, G
    # (1 of 3 responds).
    low, high = confint_proportions_2indep(3, 4, 1, 3, method="wald", compare="diff", alpha=0.1)
    assert top.estimate == pytest.approx(3 / 4 - 1 / 3, rel=1e-14)
    assert (top.low, top.high) == pytest.approx((low, high), rel=1e-12)


def test_arm_missing_from_the_top_gives_nan() -> None:
    top = uplift_at_top([1, 0, 1, 0], [1, 1, 0, 0], [4.0, 3.0, 2.0, 1.0], fraction=0.5)
    assert np.isnan(top.estimate) and np.isnan(top.low)
    assert (top.n_treated, top.n_control) == (2.0, 0.0)


def _thornton() -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    data = thornton_hiv.load_pandas().data.dropna(subset=["got", "any", "distvct"])
    return data["got"].to_numpy(), data["any"].to_numpy(), -data["distvct"].to_numpy()


def test_whole_population_matches_statsmodels_on_thornton() -> None:
    # Thornton (2008), AER 98(5): randomized cash incentive ("any") to learn HIV results
    # ("got"), shipped by the causaldata package.
    y, treatment, score = _thornton()
    top = uplift_at_top(y, treatment, score, fraction=1.0)
    treated, control = y[treatment == 1], y[treatment == 0]
    # Reference: statsmodels confint_proportions_2indep (Wald).
    low, high = confint_proportions_2indep(
        treated.sum(), len(treated), control.sum(), len(control), method="wald", compare="diff"
    )
    assert (top.low, top.high) == pytest.approx((low, high), rel=1e-12)
    assert (top.n_treated, top.n_control) == (len(treated), len(control))
    # From memory: the paper reports an increase of roughly 43-45 percentage points in the
    # share learning their results for any incentive against none.
    assert 0.40 < top.estimate < 0.50


def test_top_30_percent_matches_statsmodels_on_thornton() -> None:
    y, treatment, score = _thornton()
    top = uplift_at_top(y, treatment, score, fraction=0.3)
    # Independent selection: everyone scoring at least the score of the row at rank
    # ceil(0.3 n) in descending order (so ties at the cut are included).
    cut = np.sort(score)[::-1][int(np.ceil(0.3 * len(score))) - 1]
    chosen = score >= cut
    treated, control = y[chosen & (treatment == 1)], y[chosen & (treatment == 0)]
    assert top.fraction == pytest.approx(chosen.mean(), rel=1e-12)
    # Reference: statsmodels confint_proportions_2indep (Wald) on the same rows.
    low, high = confint_proportions_2indep(
        treated.sum(), len(treated), control.sum(), len(control), method="wald", compare="diff"
    )
    assert top.estimate == pytest.approx(treated.mean() - control.mean(), rel=1e-12)
    assert (top.low, top.high) == pytest.approx((low, high), rel=1e-12)


def test_weighted_interval_uses_kish_effective_size() -> None:
    rng = np.random.default_rng(5)
    y = rng.normal(10.0, 3.0, 400)
    treatment = rng.integers(0, 2, 400)
    weight = rng.uniform(0.5, 4.0, 400)
    top = uplift_at_top(y, treatment, np.zeros(400), fraction=1.0, sample_weight=weight)
    # Reference: statsmodels DescrStatsW for the weighted mean and the weighted (ddof=0)
    # variance of each arm; Kish effective size (sum w)^2 / sum w^2.
    arms = [DescrStatsW(y[treatment == a], weights=weight[treatment == a]) for a in (1, 0)]
    kish = [
        (weight[treatment == a].sum() ** 2) / (weight[treatment == a] ** 2).sum() for a in (1, 0)
    ]
    se = np.sqrt(arms[0].var / kish[0] + arms[1].var / kish[1])
    estimate = arms[0].mean - arms[1].mean
    assert top.estimate == pytest.approx(estimate, rel=1e-12)
    # 1.959963984540054 = 97.5% normal quantile (scipy.stats.norm.ppf(0.975)).
    assert top.high - top.low == pytest.approx(2 * 1.959963984540054 * se, rel=1e-12)
