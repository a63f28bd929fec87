"""Profit curve: value times estimated incremental conversions minus contact cost."""

from __future__ import annotations

import numpy as np
import pytest

from service.evaluation import profit_curve, uplift_curve


def test_profit_matches_hand_computation(worked: dict[str, np.ndarray]) -> None:
    # profit = 10 * U(k) - 1 * (N_T + N_C), with U from test_curves:
    expected = [
        0.0,
        10 * 2.0 - 2,
        10 * 3.0 - 3,
        10 * 1.5 - 6,
        10 * 35 / 12 - 7,
        10 * 32 / 15 - 8,
        10 * 2.0 - 10,
    ]
    curve = profit_curve(**worked, value=10.0, cost=1.0)
    np.testing.assert_allclose(curve.y, expected, rtol=1e-14)
    # Best cut: the top 30% (groups A, B and C).
    assert curve.x[curve.y.argmax()] == pytest.approx(0.3)


def test_free_contact_gives_value_times_uplift_curve(worked: dict[str, np.ndarray]) -> None:
    profit = profit_curve(**worked, value=2.5, cost=0.0)
    np.testing.assert_allclose(profit.y, 2.5 * uplift_curve(**worked).y, rtol=1e-15)
