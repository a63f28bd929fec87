"""Inputs that cannot be evaluated fail with a DataError that says what to fix."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from service.errors import DataError
from service.evaluation import (
    calibration_table,
    decile_table,
    profit_curve,
    qini_coefficient,
    qini_curve,
    uplift_at_top,
)

Y = [1, 0, 1, 0, 1]
T = [1, 0, 1, 0, 0]
S = [0.5, 0.4, 0.3, 0.2, 0.1]


def test_length_mismatch_names_every_array() -> None:
    with pytest.raises(DataError, match="y has 5, treatment has 5, score has 4 rows"):
        qini_curve(Y, T, S[:4])
    with pytest.raises(DataError, match="score has 5, sample_weight has 3 rows"):
        qini_curve(Y, T, S, sample_weight=[1, 1, 1])


def test_missing_values_in_score_or_outcome() -> None:
    with pytest.raises(DataError, match=r"score has 1 missing .* \(first at row 2\)"):
        qini_curve(Y, T, [0.5, 0.4, np.nan, 0.2, 0.1])
    with pytest.raises(DataError, match=r"y has 2 missing .* \(first at row 0\)"):
        qini_curve(pd.Series([np.nan, 0, 1, np.nan, 1]), T, S)


def test_missing_values_in_dropped_arms_are_ignored() -> None:
    y = [1.0, 0.0, np.nan, 1.0]
    curve = qini_curve(y, ["a", "c", "b", "c"], [1, 2, 3, 4], control="c", arm="a")
    assert curve.x[-1] == 1.0


def test_empty_arm() -> None:
    with pytest.raises(DataError, match="no treated rows"):
        qini_curve(Y, [0, 0, 0, 0, 0], S)
    with pytest.raises(DataError, match=r"no control rows \('none'\) with positive weight"):
        qini_curve(
            [1, 0], ["mail", "none"], [1, 2], sample_weight=[1, 0], control="none", arm="mail"
        )


def test_empty_arm_by_weight() -> None:
    with pytest.raises(DataError, match="no control rows with positive weight"):
        qini_curve(Y, T, S, sample_weight=[1, 0, 1, 0, 0])


def test_unknown_label() -> None:
    labels = ["mail", "none", "call", "mail", "none"]
    with pytest.raises(DataError, match=r"arm label 'sms' is not among .*\['call', 'mail'"):
        qini_curve(Y, labels, S, control="none", arm="sms")
    with pytest.raises(DataError, match="control label 'hold' is not among"):
        qini_curve(Y, labels, S, control="hold", arm="mail")


def test_labels_need_control_and_arm() -> None:
    labels = ["mail", "none", "call", "mail", "none"]
    with pytest.raises(DataError, match="pass control=<label> and arm=<label>"):
        qini_curve(Y, labels, S)
    with pytest.raises(DataError, match="Pass both control=<label> and arm=<label>"):
        qini_curve(Y, labels, S, control="none")
    with pytest.raises(DataError, match="choose two different labels"):
        qini_curve(Y, labels, S, control="mail", arm="mail")


def test_bad_shapes_and_types() -> None:
    with pytest.raises(DataError, match=r"score must be one-dimensional, got shape \(5, 2\)"):
        qini_curve(Y, T, np.zeros((5, 2)))
    with pytest.raises(DataError, match="y must be numeric"):
        qini_curve(["yes", "no", "yes", "no", "yes"], T, S)
    with pytest.raises(DataError, match="sample_weight has negative values"):
        qini_curve(Y, T, S, sample_weight=[1, -1, 1, 1, 1])


def test_bad_options() -> None:
    with pytest.raises(DataError, match=r"fraction must be in \(0, 1\], got 0"):
        uplift_at_top(Y, T, S, fraction=0)
    with pytest.raises(DataError, match="confidence must be between 0 and 1"):
        uplift_at_top(Y, T, S, confidence=95)
    with pytest.raises(DataError, match="n_bins must be a positive integer, got 0"):
        decile_table(Y, T, S, n_bins=0)
    with pytest.raises(DataError, match="strategy must be 'quantile' or 'uniform'"):
        calibration_table(Y, T, S, strategy="even")  # type: ignore[arg-type]
    with pytest.raises(DataError, match="uniform bins need a finite score range"):
        calibration_table(Y, T, [np.inf, 0, 1, 2, 3], strategy="uniform")
    with pytest.raises(DataError, match="cost must be zero or positive"):
        profit_curve(Y, T, S, value=1.0, cost=-1.0)


def test_infinite_scores_rank_fine() -> None:
    assert np.isfinite(qini_coefficient(Y, T, [np.inf, 0.4, 0.3, 0.2, -np.inf], normalize=False))
