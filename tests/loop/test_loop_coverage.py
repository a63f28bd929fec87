"""Over repeated seeds, the replay intervals cover the true value of the candidate policy."""

from __future__ import annotations

import pytest
from loop_arrays import coverage
from loop_world import train_first_model, write_campaigns

from service.policy import load_campaigns
from service.registry import ModelRegistry

REPS = 100


@pytest.mark.slow
def test_replay_intervals_cover_the_true_candidate_value_at_least_90_percent(tmp_path) -> None:
    models = tmp_path / "models"
    logging_version = train_first_model(models, n=600, seed=1)  # the policy that logs
    candidate_version = train_first_model(models, n=4000, seed=2)  # the one replayed
    registry = ModelRegistry(models)
    logging = registry.load("larkspur", logging_version).model
    candidate = registry.load("larkspur", candidate_version).model
    campaign = load_campaigns(write_campaigns(tmp_path / "c.toml"))["renewal"]
    result = coverage(range(10_000, 10_000 + REPS), 2000, logging, candidate, campaign)
    rates = result.rates()
    # Nominal 95%; with 100 logs a true 95% coverage falls below 90% with probability
    # about 2% (binomial), and below 88% well under 1%.
    assert min(rates.values()) >= 0.90, rates
    # DR and SNIPS use the same rows as IPS but vary less.
    widths = result.mean_widths()
    assert widths["dr"] < widths["ips"] and widths["snips"] < widths["ips"]
    # The realized lift on the same logs covers its truth just as often.
    assert min(result.lift_rates().values()) >= 0.90, result.lift_rates()
