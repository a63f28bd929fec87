"""Deterministic hash draws: reproducible, uniform, independent across purposes."""

from __future__ import annotations

import numpy as np
from scipy import stats

from service.policy import uniform_draws

IDS = [f"LTC-{i:06d}" for i in range(100_000)]


def test_draws_are_reproducible_and_depend_only_on_the_customer() -> None:
    first = uniform_draws("salt", "winter", IDS[:1000])
    again = uniform_draws("salt", "winter", IDS[:1000])
    for a, b in zip(first, again, strict=True):
        np.testing.assert_array_equal(a, b)
    # Order and company of other ids do not matter: a retried single call draws alike.
    alone = uniform_draws("salt", "winter", [IDS[500]])
    assert alone.explore[0] == first.explore[500] and alone.holdout[0] == first.holdout[500]
    # Integer ids are compared as text.
    assert uniform_draws("s", "c", [7]).arm[0] == uniform_draws("s", "c", ["7"]).arm[0]


def test_salt_and_campaign_change_the_draws() -> None:
    base = uniform_draws("salt", "winter", IDS[:1000]).explore
    assert not np.array_equal(base, uniform_draws("salt2", "winter", IDS[:1000]).explore)
    assert not np.array_equal(base, uniform_draws("salt", "spring", IDS[:1000]).explore)


def test_draws_are_uniform_and_independent_over_100k_ids() -> None:
    draws = uniform_draws("salt", "winter", IDS)
    for u in draws:
        assert u.min() >= 0.0 and u.max() < 1.0
        # Reference: scipy.stats.kstest against the uniform law; alpha 0.001.
        assert stats.kstest(u, "uniform").pvalue > 0.001
    # Purposes are independent: correlations within 4 standard errors (1/sqrt(n)) of 0.
    corr = np.corrcoef(np.vstack(draws))
    assert np.abs(corr[np.triu_indices(3, 1)]).max() < 4 / np.sqrt(len(IDS))
