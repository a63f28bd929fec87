"""Sample sizes and replay volumes against statsmodels' power calculations."""

from __future__ import annotations

import json
import math
import types

import numpy as np
import pytest
from statsmodels.stats.power import NormalIndPower
from statsmodels.stats.proportion import (
    power_proportions_2indep,
    samplesize_proportions_2indep_onetail,
)

import service.planning as planning
from service.cli import main
from service.errors import DataError
from service.offpolicy.weights import effective_sample_size
from service.planning import replay_volume, sample_size_amount, sample_size_proportions


@pytest.mark.parametrize(
    ("baseline", "uplift", "power", "alpha", "ratio"),
    [
        (0.30, 0.03, 0.8, 0.05, 1.0),
        (0.05, 0.01, 0.9, 0.05, 1.0),
        (0.30, 0.03, 0.8, 0.05, 0.1 / 0.9),  # a 10% holdout of the chosen contacts
        (0.60, -0.05, 0.8, 0.01, 3.0),
    ],
)
def test_proportions_match_statsmodels(
    baseline: float, uplift: float, power: float, alpha: float, ratio: float
) -> None:
    # Source: statsmodels.stats.proportion.samplesize_proportions_2indep_onetail, the
    # z-test with pooled variance under the null (the same normal approximation).
    reference = samplesize_proportions_2indep_onetail(
        uplift, baseline, power, ratio=ratio, alpha=alpha, alternative="two-sided"
    )
    sizes = sample_size_proportions(baseline, uplift, power=power, alpha=alpha, ratio=ratio)
    assert sizes.contacted == math.ceil(reference)
    assert sizes.control == math.ceil(ratio * reference - 1e-9)

    # The rounded-up size reaches the power, one customer fewer does not (statsmodels'
    # power function, both tails counted).
    def achieved(n: float) -> float:
        return float(
            power_proportions_2indep(
                uplift, baseline, n, ratio=ratio, alpha=alpha, return_results=False
            )
        )

    assert achieved(sizes.contacted) >= power - 1e-6
    assert achieved(sizes.contacted - 1) < power


def test_known_textbook_value() -> None:
    # 30% -> 33% at 80% power, 5% two-sided: about 3,760 per group (the classic
    # normal-approximation figure; from memory, checked against statsmodels above).
    assert 3740 <= sample_size_proportions(0.30, 0.03).contacted <= 3780


@pytest.mark.parametrize(("ratio", "power"), [(1.0, 0.8), (0.25, 0.9), (4.0, 0.8)])
def test_amounts_match_normal_ind_power(ratio: float, power: float) -> None:
    # Source: statsmodels.stats.power.NormalIndPower (two-sample z-test, effect = D / S).
    reference = NormalIndPower().solve_power(
        effect_size=2.0 / 15.0, alpha=0.05, power=power, ratio=ratio
    )
    sizes = sample_size_amount(2.0, 15.0, power=power, ratio=ratio)
    assert sizes.contacted == math.ceil(reference)


def test_replay_ess_matches_normal_ind_power_and_kish() -> None:
    volume = replay_volume(margin=0.01, sd=0.45, exploration=0.05, holdout=0.10, arms=2)
    # Needed ESS: a two-sample z-test on the difference (statsmodels NormalIndPower).
    reference = NormalIndPower().solve_power(effect_size=0.01 / 0.45, alpha=0.05, power=0.8)
    assert volume.effective_sample_size == math.ceil(reference)
    # ESS per decision: Kish's effective sample size of the IPS weights of a candidate
    # that departs from the logging policy on every decision, on a simulated log.
    rng = np.random.default_rng(0)
    n, options, e, h = 400_000, 3, 0.05, 0.10
    greedy = rng.integers(1, options, n)  # the logging policy contacts someone
    explored = rng.random(n) < e
    chosen = np.where(explored, rng.integers(0, options, n), greedy)
    candidate = np.where(greedy == 1, 2, 1)  # always the other arm
    held = rng.random(n) < h
    action = np.where(held, 0, chosen)
    p = (1 - h) * e / options
    weights = np.where(action == candidate, 1.0 / p, 0.0)
    assert effective_sample_size(weights) / n == pytest.approx(volume.ess_per_decision, rel=0.05)
    assert volume.decisions == math.ceil(volume.effective_sample_size / volume.ess_per_decision)


def test_replay_without_exploration_is_impossible() -> None:
    assert math.isinf(replay_volume(margin=0.01, sd=0.4, exploration=0.0, holdout=0.1).decisions)


def test_bad_rates_name_the_value() -> None:
    with pytest.raises(DataError, match="baseline=1.2"):
        sample_size_proportions(1.2, 0.03)
    with pytest.raises(DataError, match="power=1.5"):
        sample_size_amount(1.0, 2.0, power=1.5)


def test_plan_command_json(capsys: pytest.CaptureFixture[str]) -> None:
    code = main(
        [
            "plan",
            "--baseline",
            "0.3",
            "--uplift",
            "0.03",
            "--holdout",
            "0.1",
            "--exploration",
            "0.05",
            "--margin",
            "0.01",
            "--daily",
            "5000",
            "--json",
        ]
    )
    assert code == 0
    body = json.loads(capsys.readouterr().out)
    assert body["n_per_group"] == sample_size_proportions(0.3, 0.03).contacted
    assert body["holdout"]["held_out"] == sample_size_proportions(0.3, 0.03, ratio=1 / 9).control
    assert body["replay"]["days"] == pytest.approx(body["replay"]["decisions"] / 5000)


def test_plan_command_refuses_margin_without_exploration(
    capsys: pytest.CaptureFixture[str],
) -> None:
    assert main(["plan", "--baseline", "0.3", "--uplift", "0.03", "--margin", "0.01"]) == 1
    assert "--exploration" in capsys.readouterr().err


def test_public_surface() -> None:
    public = {
        name
        for name, obj in vars(planning).items()
        if not name.startswith("_") and not isinstance(obj, types.ModuleType)
    }
    assert public - {"annotations"} == set(planning.__all__)
