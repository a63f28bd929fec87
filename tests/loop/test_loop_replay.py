"""Replay on a real decision log: coverage of the true value, the promotion gate, support."""

from __future__ import annotations

import numpy as np
import pytest
from loop_world import (
    CAMPAIGN,
    bind,
    expected_for,
    run_day_in_process,
    train_worse_model,
    true_policy_value,
    write_campaigns,
)

from service.decisions import DecisionLog
from service.loop import candidate_actions, read_logged, replay, replay_gate
from service.offpolicy import one_hot
from service.policy import load_campaigns
from service.registry import ModelRegistry


@pytest.fixture(scope="module")
def worse(world) -> str:
    return train_worse_model(world.models_dir)


def _truth(world, logged, bundle, campaign) -> float:
    done = logged.with_outcomes()
    action, _ = candidate_actions(bundle, campaign, done)
    expected = expected_for(world.days, done.decision_ids)
    return true_policy_value(expected, one_hot(action, 3))


def test_replay_intervals_cover_the_true_value_of_the_champion_policy(world) -> None:
    campaign = load_campaigns(world.campaigns_file)[CAMPAIGN]
    logged = read_logged(world.log_path, CAMPAIGN)
    bundle = ModelRegistry(world.models_dir).load("larkspur", world.first_version)
    result = replay(logged, campaign, bundle)
    truth = _truth(world, logged, bundle, campaign)
    for est in result.net_value.estimates():
        assert est.low <= truth <= est.high, (est, truth)
    assert result.net_value.support.ok or result.net_value.support.unsupported_rows < 100
    assert 0.5 < result.agreement < 1.0  # greedy vs the logged (explored, held-out) actions
    assert result.net_value.ess > 1000
    assert result.to_dict()["evaluated"] == 6000


def test_a_worse_candidate_is_refused_and_the_champion_does_not_beat_itself(world, worse) -> None:
    campaign = load_campaigns(world.campaigns_file)[CAMPAIGN]
    logged = read_logged(world.log_path, CAMPAIGN)
    registry = ModelRegistry(world.models_dir)
    champion = registry.load("larkspur", world.first_version)
    challenger = registry.load("larkspur", worse)
    # Known worse: its greedy policy's true value is below the champion's.
    assert (
        _truth(world, logged, challenger, campaign)
        < _truth(world, logged, champion, campaign) - 0.5
    )
    gate = replay_gate(logged, campaign, challenger, champion, margin=0.0)
    assert not gate.passed and "does not beat" in gate.message
    assert gate.difference["dr"].high < 0  # clearly worse, not just noise
    reverse = replay_gate(logged, campaign, champion, challenger, margin=0.0)
    assert reverse.passed
    assert not replay_gate(logged, campaign, champion, champion).passed  # 0 is not > 0
    # The stricter rule asks the whole interval to clear the margin; a clear win does.
    strict = replay_gate(logged, campaign, champion, challenger, rule="lower")
    assert strict.passed == (reverse.difference["dr"].low > 0) and strict.passed
    assert not replay_gate(logged, campaign, champion, challenger, margin=1e6).passed


def test_a_log_without_exploration_lacks_support(world, worse, tmp_path) -> None:
    campaigns = write_campaigns(tmp_path / "greedy.toml", exploration=0.0, holdout=0.0)
    path = tmp_path / "greedy.sqlite3"
    with DecisionLog.open(path) as log:
        run_day_in_process(bind(world.models_dir, campaigns), log, log, 9, 800)
    campaign = load_campaigns(campaigns)[CAMPAIGN]
    logged = read_logged(path, CAMPAIGN)
    challenger = ModelRegistry(world.models_dir).load("larkspur", worse)
    result = replay(logged, campaign, challenger)
    assert not result.net_value.support.ok
    assert any("lacks support" in w for w in result.warnings)
    assert np.isfinite(result.net_value.ips.value)
