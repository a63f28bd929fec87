"""The stated truth of each design agrees with the data it generates, on large samples.

Each check compares an unbiased estimate from the observed (treatment, outcome) pairs with
the mean of the stated truth, inside a 99% normal interval (z = 2.576). A generator whose
outcomes, propensities or effects disagree with its truth fails these checks.
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy import stats

from service.simulation import DESIGNS, SimulatedCampaign, simulate

Z99 = stats.norm.ppf(0.995)  # 2.576, two-sided 99%
N = 200_000
RANDOMIZED = ["nw_b", "groups", "groups_two_arms", "larkspur"]


def _within(estimate: float, target: float, se: float) -> None:
    assert abs(estimate - target) <= Z99 * se, (
        f"estimate {estimate:.5f} vs truth {target:.5f}: "
        f"{abs(estimate - target) / se:.2f} standard errors apart"
    )


@pytest.fixture(scope="module", params=sorted(DESIGNS))
def campaign(request: pytest.FixtureRequest) -> SimulatedCampaign:
    return simulate(request.param, N, random_state=2024)


@pytest.mark.parametrize("name", RANDOMIZED)
def test_difference_in_means_matches_mean_true_uplift(name: str) -> None:
    # Neyman (1923): in a randomized experiment the difference in means is unbiased for
    # the average effect, with variance s_1^2/n_1 + s_0^2/n_0 (binomial p(1-p) for 0/1).
    c = simulate(name, N, random_state=7)
    control = c.y[c.treatment == c.control]
    for j, arm in enumerate(c.arms):
        treated = c.y[c.treatment == arm]
        se = np.sqrt(treated.var(ddof=1) / len(treated) + control.var(ddof=1) / len(control))
        _within(treated.mean() - control.mean(), c.tau[:, j].mean(), se)


def test_horvitz_thompson_recovers_the_effect_under_confounding() -> None:
    # Horvitz & Thompson (1952): weighting by the true propensity removes the confounding
    # of setup A; the naive difference in means does not, which shows it is confounded.
    c = simulate("nw_a", N, random_state=11)
    w, y, e = c.treatment, c.y, c.propensity_matrix[:, 1]
    psi = w * y / e - (1 - w) * y / (1 - e)
    _within(psi.mean(), c.tau[:, 0].mean(), (psi - c.tau[:, 0]).std(ddof=1) / np.sqrt(N))
    naive = y[w == 1].mean() - y[w == 0].mean()
    se = np.sqrt(y[w == 1].var() / (w == 1).sum() + y[w == 0].var() / (w == 0).sum())
    assert abs(naive - c.tau[:, 0].mean()) > 10 * se


def test_outcomes_scatter_around_the_stated_means(campaign: SimulatedCampaign) -> None:
    # For every label, the observed mean outcome of the rows assigned to it is unbiased for
    # the mean of the stated expected outcome over those rows (central limit theorem).
    mu = campaign.expected_outcomes()
    for j, label in enumerate(campaign.labels):
        rows = campaign.treatment == label
        residual = campaign.y[rows] - mu[rows, j]
        _within(residual.mean(), 0.0, residual.std(ddof=1) / np.sqrt(rows.sum()))


def test_assignment_follows_the_stated_propensities(campaign: SimulatedCampaign) -> None:
    # Pearson goodness of fit: rows binned by stated propensity; observed vs expected
    # counts of each label give a chi-square statistic, tested at the 1% level.
    p = campaign.propensity_matrix
    for j, label in enumerate(campaign.labels):
        edges = np.unique(np.quantile(p[:, j], np.linspace(0, 1, 11)))
        last = max(len(edges) - 2, 0)  # a constant propensity makes a single bin
        bins = np.clip(np.searchsorted(edges, p[:, j], side="right") - 1, 0, last)
        hit = (campaign.treatment == label).astype(float)
        observed = np.bincount(bins, weights=hit)
        expected = np.bincount(bins, weights=p[:, j])
        variance = np.bincount(bins, weights=p[:, j] * (1 - p[:, j]))
        statistic = float((((observed - expected) ** 2) / variance).sum())
        assert stats.chi2.sf(statistic, df=len(observed)) > 0.01, (label, statistic)


def test_propensities_are_valid_probabilities(campaign: SimulatedCampaign) -> None:
    p = campaign.propensity_matrix
    assert np.all((p > 0) & (p < 1))
    np.testing.assert_allclose(p.sum(axis=1), 1.0, atol=1e-12)
    order = {label: j for j, label in enumerate(campaign.labels)}
    column = np.array([order[label] for label in campaign.treatment.tolist()])
    np.testing.assert_array_equal(campaign.propensity, p[np.arange(N), column])
    assert np.all((campaign.propensity > 0) & (campaign.propensity < 1))


@pytest.mark.parametrize("name", ["groups", "groups_two_arms", "larkspur"])
def test_binary_truth_is_a_probability(name: str) -> None:
    campaign = simulate(name, 20000, random_state=5)
    assert campaign.outcome_type == "binary"
    mu = campaign.expected_outcomes()
    assert np.all((mu > 0) & (mu < 1))
    assert set(np.unique(campaign.y)) == {0.0, 1.0}
