"""Decile and calibration tables: tie-aware bins and per-bin statistics."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from statsmodels.stats.proportion import confint_proportions_2indep

from service.evaluation import calibration_table, decile_table


def test_decile_bins_follow_group_middles(worked: dict[str, np.ndarray]) -> None:
    # Group middles of cumulative weight, times 5 bins, rounded up:
    #   A,B 0.10 -> 1;  C 0.25 -> 2;  D,E,F 0.45 -> 3;  G 0.65 -> 4;  H 0.75 -> 4;
    #   I,J 0.90 -> 5
    table = decile_table(**worked, n_bins=5)
    assert table["bin"].tolist() == [1, 2, 3, 4, 5]
    assert table["score_max"].tolist() == [0.9, 0.7, 0.5, 0.3, 0.1]
    assert table["score_min"].tolist() == [0.9, 0.7, 0.5, 0.2, 0.1]
    assert table["n_treated"].tolist() == [1, 1, 2, 1, 0]
    assert table["n_control"].tolist() == [1, 0, 1, 1, 2]
    # Bin 3 (D, E, F): treated E=0, F=1 -> 0.5; control D=1 -> 1.0.
    third = table.iloc[2]
    assert (third["rate_treated"], third["rate_control"], third["uplift"]) == (0.5, 1.0, -0.5)
    # Reference: statsmodels confint_proportions_2indep (Wald) for 1/2 against 1/1.
    low, high = confint_proportions_2indep(1, 2, 1, 1, method="wald", compare="diff")
    assert (third["uplift_low"], third["uplift_high"]) == pytest.approx((low, high), rel=1e-12)
    # Bin 4 holds G (0.3) and H (0.2): mean predicted uplift 0.25.
    assert table.iloc[3]["predicted_uplift"] == pytest.approx(0.25)
    # Bin 2 has no control row and bin 5 no treated row: uplift undefined.
    assert table["uplift"].isna().tolist() == [False, True, False, False, True]


def test_deciles_hold_a_tenth_each_without_ties() -> None:
    rng = np.random.default_rng(3)
    n = 1000
    table = decile_table(rng.integers(0, 2, n), rng.integers(0, 2, n), rng.normal(size=n))
    counts = table["n_treated"] + table["n_control"]
    assert counts.tolist() == [100.0] * 10


def test_all_tied_scores_fill_one_bin() -> None:
    table = decile_table([1, 0, 1, 0], [1, 1, 0, 0], [0.5, 0.5, 0.5, 0.5], n_bins=4)
    counts = (table["n_treated"] + table["n_control"]).tolist()
    # The single group's middle is at 0.5 of the weight: bin 2 of 4.
    assert counts == [0.0, 4.0, 0.0, 0.0]
    assert table.loc[0, ["rate_treated", "uplift"]].isna().all()


def test_calibration_quantile_matches_decile_table(worked: dict[str, np.ndarray]) -> None:
    calibration = calibration_table(**worked, n_bins=5)
    deciles = decile_table(**worked, n_bins=5)
    pd.testing.assert_series_equal(
        calibration["observed_uplift"], deciles["uplift"], check_names=False
    )
    pd.testing.assert_series_equal(calibration["predicted_uplift"], deciles["predicted_uplift"])


def test_calibration_uniform_bins_and_coverage(worked: dict[str, np.ndarray]) -> None:
    # Score range 0.1..0.9 in three equal widths: edges 0.367 and 0.633.
    table = calibration_table(**worked, n_bins=3, strategy="uniform")
    assert table["score_min"].tolist() == [0.7, 0.5, 0.1]
    assert table["n_treated"].tolist() == [2, 2, 1]
    assert table["n_control"].tolist() == [1, 1, 3]
    # Bin 3 (G, H, I, J): treated 0/1, control 1/3 -> observed -1/3, interval spans 0.175.
    bottom = table.iloc[2]
    assert bottom["observed_uplift"] == pytest.approx(-1 / 3)
    assert bottom["predicted_uplift"] == pytest.approx((0.3 + 0.2 + 0.1 + 0.1) / 4)
    assert table["covered"].tolist() == [False, False, True]


def test_calibrated_score_is_mostly_covered() -> None:
    # Scores equal to the true effect: about 95% of bins should cover it.
    rng = np.random.default_rng(8)
    n = 20000
    effect = rng.choice([0.0, 0.05, 0.1, 0.2], n)
    treatment = rng.integers(0, 2, n)
    y = (rng.uniform(size=n) < 0.3 + effect * treatment).astype(int)
    table = calibration_table(y, treatment, effect, n_bins=4, strategy="uniform")
    assert table["covered"].sum() >= 3
    assert np.abs(table["observed_uplift"] - table["predicted_uplift"]).max() < 0.05
