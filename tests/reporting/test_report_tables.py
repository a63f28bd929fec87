"""The numbers behind the plots, checked against direct computation on the data."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from service.evaluation import decile_table, qini_curve
from service.registry import OutOfFold
from service.reporting import Economics, arm_tables


def test_profit_at_full_contact_matches_the_difference_in_means(true_oof: OutOfFold) -> None:
    # Contacting everyone: profit per customer = value * (treated mean - control mean) - cost,
    # computed here straight from the rows with pandas.
    economics = Economics.build(3.0, {"email": 0.05, "call": 0.4}, true_oof.arms)
    frame = pd.DataFrame({"y": true_oof.y, "t": true_oof.treatment})
    means = frame.groupby("t")["y"].mean()
    for tables in arm_tables(true_oof, economics):
        expected = 3.0 * (means[tables.arm] - means[true_oof.control]) - economics.cost[tables.arm]
        assert tables.profit["fraction"].iloc[-1] == pytest.approx(1.0)
        assert tables.profit["profit_per_1000"].iloc[-1] == pytest.approx(1000 * expected)
        best = tables.profit["profit_per_1000"].idxmax()
        assert tables.best_profit["fraction"] == tables.profit["fraction"][best]


def test_qini_table_lines(true_oof: OutOfFold) -> None:
    economics = Economics.build(1.0, 0.0, true_oof.arms)
    for j, tables in enumerate(arm_tables(true_oof, economics)):
        q = tables.qini
        curve = qini_curve(
            true_oof.y,
            true_oof.treatment,
            true_oof.scores[:, j],
            control=true_oof.control,
            arm=tables.arm,
        )
        np.testing.assert_array_equal(q["model"], curve.y)
        # The random line joins (0, 0) and the end of the curve.
        np.testing.assert_allclose(q["random"], q["fraction"] * curve.y[-1])
        assert q["best"].iloc[-1] == pytest.approx(curve.y[-1])
        # Ranking by the true effect beats random targeting (demo data has real effects).
        assert np.trapezoid(q["model"] - q["random"], q["fraction"]) > 0
        expected = decile_table(
            true_oof.y,
            true_oof.treatment,
            true_oof.scores[:, j],
            control=true_oof.control,
            arm=tables.arm,
        )
        pd.testing.assert_frame_equal(tables.deciles, expected)
        assert len(tables.calibration) == 10
