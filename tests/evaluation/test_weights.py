"""Integer sample weights act like repeated rows (intervals aside, by design)."""

from __future__ import annotations

import numpy as np
import pandas as pd
from hypothesis import given, settings

from service.evaluation import (
    auuc,
    decile_table,
    profit_curve,
    qini_coefficient,
    qini_curve,
    uplift_at_top,
)

from .test_properties import campaigns


def _repeat(data: dict[str, np.ndarray]) -> dict[str, np.ndarray]:
    counts = data["sample_weight"].astype(int)
    return {name: np.repeat(v, counts) for name, v in data.items() if name != "sample_weight"}


@settings(max_examples=60, deadline=None)
@given(data=campaigns())
def test_integer_weights_equal_repeated_rows(data: dict[str, np.ndarray]) -> None:
    repeated = _repeat(data)
    weighted_curve, repeated_curve = qini_curve(**data), qini_curve(**repeated)
    np.testing.assert_allclose(weighted_curve.x, repeated_curve.x, rtol=1e-12)
    np.testing.assert_allclose(weighted_curve.y, repeated_curve.y, rtol=1e-12, atol=1e-12)
    assert np.isclose(
        qini_coefficient(**data, normalize=False), qini_coefficient(**repeated, normalize=False)
    )
    assert np.isclose(auuc(**data), auuc(**repeated))
    profit = profit_curve(**data, value=3.0, cost=0.5).y
    np.testing.assert_allclose(profit, profit_curve(**repeated, value=3.0, cost=0.5).y, atol=1e-9)
    for fraction in (0.1, 0.3, 0.6):
        w, r = (
            uplift_at_top(**data, fraction=fraction),
            uplift_at_top(**repeated, fraction=fraction),
        )
        np.testing.assert_allclose(
            [w.estimate, w.n_treated, w.n_control, w.fraction],
            [r.estimate, r.n_treated, r.n_control, r.fraction],
            rtol=1e-12,
        )
    columns = ["n_treated", "n_control", "rate_treated", "rate_control", "uplift"]
    pd.testing.assert_frame_equal(
        decile_table(**data, n_bins=3)[columns], decile_table(**repeated, n_bins=3)[columns]
    )


def test_weighted_interval_is_wider_than_repeated_rows() -> None:
    # Weights are sampling weights (Kish effective size), not frequencies: same estimate,
    # wider interval than literally repeating the rows.
    rng = np.random.default_rng(4)
    data = {
        "y": rng.integers(0, 2, 200),
        "treatment": rng.integers(0, 2, 200),
        "score": rng.normal(size=200),
        "sample_weight": rng.integers(1, 5, 200).astype(float),
    }
    weighted = uplift_at_top(**data, fraction=0.5)
    repeated = uplift_at_top(**_repeat(data), fraction=0.5)
    assert np.isclose(weighted.estimate, repeated.estimate)
    assert weighted.high - weighted.low > repeated.high - repeated.low


def test_zero_weight_rows_change_nothing() -> None:
    rng = np.random.default_rng(6)
    y, treatment, score = rng.integers(0, 2, 60), rng.integers(0, 2, 60), rng.normal(size=60)
    weight = np.where(np.arange(60) % 7 == 0, 0.0, 1.0)
    keep = weight > 0
    assert qini_coefficient(y, treatment, score, sample_weight=weight) == qini_coefficient(
        y[keep], treatment[keep], score[keep]
    )
    assert uplift_at_top(y, treatment, score, 0.3, sample_weight=weight) == uplift_at_top(
        y[keep], treatment[keep], score[keep], 0.3
    )
