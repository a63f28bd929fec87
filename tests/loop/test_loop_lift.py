"""Realized lift read from a real decision log: it covers the simulated truth."""

from __future__ import annotations

import numpy as np
import pytest
from loop_world import CAMPAIGN

from service.errors import DataError, NotFoundError
from service.loop import campaign_lift, plot_lift, read_logged
from service.policy import load_campaigns


def test_lift_interval_covers_the_simulated_true_lift(world) -> None:
    campaign = load_campaigns(world.campaigns_file)[CAMPAIGN]
    report = campaign_lift(read_logged(world.log_path, CAMPAIGN), campaign)
    tau = np.vstack([d.sim.expected_outcomes() - d.sim.mu0[:, None] for d in world.days])
    chosen = np.concatenate([d.chosen for d in world.days])
    probs = np.vstack([d.probs for d in world.days])
    # Truth: mean true uplift of the chosen arm over the customers the policy chose to
    # contact, and sum_a P(a) tau_a per decision (from the simulation's expected outcomes).
    true_targeted = tau[np.arange(len(chosen)), chosen][chosen > 0].mean()
    true_policy = (probs * tau).sum(axis=1).mean()
    t = report.lift.targeted
    assert t is not None
    assert t.difference.low <= true_targeted <= t.difference.high
    assert report.lift.lift.low <= true_policy <= report.lift.lift.high
    assert report.decisions == report.with_outcome == 6000
    # Every decision has an outcome; the only warnings concern "everyone by <arm>",
    # which the log cannot fully support: do-not-contact customers never got that arm.
    assert report.warnings and all(w.startswith("contact everyone by") for w in report.warnings)
    assert not report.lift.alternatives["none"].outcome.warnings
    body = report.to_dict()
    assert body["targeted"]["lift"]["estimate"] == pytest.approx(t.difference.value)
    assert set(body["alternatives"]) == {"none", "email", "call"}


def test_window_selects_one_day(world) -> None:
    day2 = read_logged(world.log_path, CAMPAIGN, since=world.boundaries[1])
    assert len(day2) == 3000
    assert set(day2.decision_ids) == set(world.days[1].decision_ids)
    day1 = read_logged(world.log_path, CAMPAIGN, until=world.boundaries[1])
    # Decisions of one batch share a time; the log orders them by id, so align by id.
    first = world.days[0]
    where = {d: i for i, d in enumerate(first.decision_ids)}
    order = [where[d] for d in day1.decision_ids]
    np.testing.assert_array_equal(day1.action, first.action[order])
    np.testing.assert_array_equal(day1.outcome, first.outcome[order])
    np.testing.assert_allclose(day1.action_probs, first.probs[order])
    # The most recent decisions, read from the end of the index, in log order.
    everything = read_logged(world.log_path, CAMPAIGN)
    tail = read_logged(world.log_path, CAMPAIGN, last=100)
    assert tail.decision_ids == [d for d in everything.decision_ids[-100:]]


def test_plot_is_a_png(world, tmp_path) -> None:
    campaign = load_campaigns(world.campaigns_file)[CAMPAIGN]
    report = campaign_lift(read_logged(world.log_path, CAMPAIGN), campaign)
    path = plot_lift(report, tmp_path / "lift.png")
    assert path.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n" and path.stat().st_size > 10_000


def test_missing_campaign_or_outcomes_say_what_to_do(world) -> None:
    with pytest.raises(NotFoundError, match="no decisions of campaign 'nope'"):
        read_logged(world.log_path, "nope")
    campaign = load_campaigns(world.campaigns_file)[CAMPAIGN]
    logged = read_logged(world.log_path, CAMPAIGN)
    empty = logged.subset(np.zeros(len(logged), dtype=bool))
    with pytest.raises(DataError, match="post outcomes"):
        campaign_lift(empty, campaign)
