"""Honest segments against a design whose true segments are known, and statsmodels."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from statsmodels.stats.proportion import confint_proportions_2indep

from service.errors import DataError
from service.evaluation.segments import honest_segments
from tests.evaluation.segment_world import step_segments


def _segments(seed: int, n: int = 20000, **options: object) -> tuple:
    X, y, t, tau = step_segments(n, seed)
    found = honest_segments(
        X, y, t, tau[:, None], arms=["email"], control="none", random_state=seed, **options
    )
    return found, X, y, t, tau


def test_the_truly_persuadable_and_harmed_groups_come_out_with_covering_intervals() -> None:
    # The "step segments" design (tests/evaluation/segment_world.py) over eight seeds.
    covered, total = 0, 0
    for seed in range(8):
        found, X, y, t, tau = _segments(seed)
        held_out = np.concatenate([s.rows for s in found])
        by_reading = {
            reading: np.concatenate([s.rows for s in found if s.reading == reading] or [[]])
            for reading in ("persuadables", "do-not-disturb")
        }
        persuadable = held_out[tau[held_out] > 0]
        harmed = held_out[tau[held_out] < 0]
        # Most truly persuadable rows sit in segments read as persuadables, and hardly
        # any of the truly harmed; and the other way round.
        assert np.isin(persuadable, by_reading["persuadables"]).mean() >= 0.75, seed
        assert np.isin(harmed, by_reading["do-not-disturb"]).mean() >= 0.75, seed
        assert np.isin(harmed, by_reading["persuadables"]).mean() <= 0.05, seed
        assert np.isin(persuadable, by_reading["do-not-disturb"]).mean() <= 0.05, seed
        for s in found:
            total += 1
            covered += s.low <= tau[s.rows].mean() <= s.high
    # 95% intervals: allow for chance, but not for a biased (dishonest) estimate.
    assert covered / total >= 0.85, (covered, total)


def test_rules_read_as_the_true_segment() -> None:
    found, *_ = _segments(0, depth=2)
    rules = {s.rule: s.reading for s in found}
    assert rules.get("plan = sampler and tenure_months >= 24") == "do-not-disturb", rules


def test_figures_come_from_the_held_out_half_only() -> None:
    found, X, y, t, tau = _segments(1)
    rows = np.concatenate([s.rows for s in found])
    # Every held-out row in exactly one segment, and about half the rows held out.
    assert len(np.unique(rows)) == len(rows)
    assert abs(len(rows) - len(y) / 2) <= 1
    assert sum(s.share for s in found) == pytest.approx(1.0)
    assert sum(s.n for s in found) == len(rows)  # one arm: every row is in the pair


def test_segment_interval_matches_statsmodels_wald_interval() -> None:
    found, X, y, t, tau = _segments(2)
    s = found[0]
    treated, control = s.rows[t[s.rows] == "email"], s.rows[t[s.rows] == "none"]
    # Reference: statsmodels' Wald interval for a difference of two proportions.
    low, high = confint_proportions_2indep(
        int(y[treated].sum()),
        len(treated),
        int(y[control].sum()),
        len(control),
        method="wald",
        compare="diff",
    )
    assert (s.low, s.high) == pytest.approx((low, high), abs=1e-9)
    assert s.control_rate == pytest.approx(y[control].mean())
    assert s.predicted_uplift == pytest.approx(tau[s.rows].mean())
    assert set(s.to_dict()) == {
        "rule", "share", "n", "arm", "uplift", "low", "high", "control_rate",
        "predicted_uplift", "reading",
    }  # fmt: skip


def test_missing_values_appear_in_the_rule() -> None:
    X, y, t, tau = step_segments(20000, 3)
    X["tenure_months"] = X["tenure_months"].astype(float)
    X.loc[X.index % 7 == 0, "tenure_months"] = np.nan
    found = honest_segments(X, y, t, tau[:, None], arms=["email"], control="none")
    tenure_rules = [s.rule for s in found if "tenure_months" in s.rule]
    assert tenure_rules and any("tenure_months missing" in r for r in tenure_rules)


def test_two_arms_give_segments_per_arm() -> None:
    X, y, t, tau = step_segments(6000, 4)
    t = np.where((t == "email") & (np.arange(len(t)) % 2 == 0), "call", t).astype(object)
    predicted = np.column_stack([tau, tau])
    found = honest_segments(X, y, t, predicted, arms=["call", "email"], control="none")
    assert {s.arm for s in found} == {"call", "email"}


@pytest.mark.parametrize(
    ("options", "message"),
    [
        ({"depth": 0}, "depth=0 must be a whole number from 1 to 4"),
        ({"min_share": 0.8}, "min_share=0.8 must be in"),
    ],
)
def test_bad_settings_are_refused(options: dict, message: str) -> None:
    X, y, t, tau = step_segments(1000, 0)
    with pytest.raises(DataError, match=message):
        honest_segments(X, y, t, tau[:, None], arms=["email"], control="none", **options)


def test_too_few_rows_are_refused() -> None:
    X, y, t, tau = step_segments(100, 0)
    with pytest.raises(DataError, match="100 rows are too few"):
        honest_segments(pd.DataFrame(X), y, t, tau[:, None], arms=["email"], control="none")
