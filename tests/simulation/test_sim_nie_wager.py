"""Setups A-D of Nie & Wager (2021), Biometrika 108(2): formulas at hand-computed points.

The formulas are from memory of the paper's simulation section (Section 6); each
expected value below is worked out by hand in the comment beside it.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from service.errors import DataError
from service.simulation import nie_wager
from service.simulation.nie_wager import _SETUPS


def _truth(setup: str, rows: list[list[float]]) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    return _SETUPS[setup](np.array(rows, dtype=float))


def test_setup_a_formulas_at_hand_computed_points() -> None:
    e, b, tau = _truth(
        "A",
        [
            # sin(pi*0.5*1) = 1 -> e = trim_0.1(1) = 0.9;
            # b = 1 + 2*(0.5-0.5)^2 + 0.2 + 0.5*0.4 = 1.4; tau = (0.5+1)/2 = 0.75
            [0.5, 1.0, 0.5, 0.2, 0.4, 0.9],
            # sin(pi*0.5/3) = sin(pi/6) = 0.5 -> e = 0.5;
            # b = 0.5 + 2*(1-0.5)^2 + 0 + 0 = 1.0; tau = (0.5 + 1/3)/2 = 5/12
            [0.5, 1.0 / 3.0, 1.0, 0.0, 0.0, 0.0],
            # sin(0) = 0 -> e = trim_0.1(0) = 0.1; b = 0 + 0 + 1 + 0.5 = 1.5; tau = 0.35
            [0.0, 0.7, 0.5, 1.0, 1.0, 0.0],
        ],
    )
    np.testing.assert_allclose(e, [0.9, 0.5, 0.1], atol=1e-12)
    np.testing.assert_allclose(b, [1.4, 1.0, 1.5], atol=1e-12)
    np.testing.assert_allclose(tau, [0.75, 5.0 / 12.0, 0.35], atol=1e-12)


def test_setup_b_formulas_at_hand_computed_points() -> None:
    e, b, tau = _truth(
        "B",
        [
            # b = max(0, 1+0, 2) + max(0, -1-1) = 2 + 0 = 2; tau = 1 + log(1+e^0) = 1 + log 2
            [1.0, 0.0, 2.0, -1.0, -1.0, 0.0],
            # b = max(0, -0.5+1, -3) + max(0, 0.5+0.5) = 0.5 + 1 = 1.5;
            # tau = -0.5 + log(1 + e) = -0.5 + 1.313262 = 0.813262
            [-0.5, 1.0, -3.0, 0.5, 0.5, 0.0],
        ],
    )
    np.testing.assert_allclose(e, [0.5, 0.5])
    np.testing.assert_allclose(b, [2.0, 1.5])
    np.testing.assert_allclose(tau, [1.0 + math.log(2.0), 0.8132616875182228], rtol=1e-12)


def test_setup_c_formulas_at_hand_computed_points() -> None:
    e, b, tau = _truth(
        "C",
        [
            # e = 1/(1+e^(0+0)) = 0.5; b = 2 log(1 + e^0.5) = 2 * 0.974077 = 1.948154
            [0.5, 0.0, 0.0, 0.0, 0.0, 0.0],
            # e = 1/(1+e^(0.5+0.5)) = 1/(1+2.718282) = 0.268941;
            # b = 2 log(1 + e^1) = 2 * 1.313262 = 2.626523
            [0.0, 0.5, 0.5, 3.0, 3.0, 3.0],
        ],
    )
    np.testing.assert_allclose(e, [0.5, 0.2689414213699951], rtol=1e-12)
    np.testing.assert_allclose(b, [1.9481539683602134, 2.6265233750364456], rtol=1e-12)
    np.testing.assert_allclose(tau, [1.0, 1.0])


def test_setup_d_formulas_at_hand_computed_points() -> None:
    e, b, tau = _truth(
        "D",
        [
            # e = 1/(1 + e^0 + e^0) = 1/3; first = max(0+0+1, 0) = 1, second = max(2-1, 0) = 1
            # -> b = (1+1)/2 = 1, tau = 1 - 1 = 0
            [0.0, 0.0, 1.0, 2.0, -1.0, 0.0],
            # e = 1/(1 + 2 e^-1) = 1/1.735759 = 0.576117; first = 3, second = 0
            # -> b = 1.5, tau = 3
            [1.0, 1.0, 1.0, 0.0, 0.0, 0.0],
            # e = 1/3; first = max(-1, 0) = 0, second = max(3, 0) = 3 -> b = 1.5, tau = -3
            [0.0, 0.0, -1.0, 2.0, 1.0, 0.0],
        ],
    )
    np.testing.assert_allclose(e, [1.0 / 3.0, 0.5761168847658291, 1.0 / 3.0], rtol=1e-12)
    np.testing.assert_allclose(b, [1.0, 1.5, 1.5])
    np.testing.assert_allclose(tau, [0.0, 3.0, -3.0])


@pytest.mark.parametrize("setup", ["A", "B", "C", "D"])
def test_campaign_carries_the_setup_truth(setup: str) -> None:
    campaign = nie_wager(setup, 500, d=8, sigma=0.0, random_state=3)  # type: ignore[arg-type]
    e, b, tau = _SETUPS[setup](campaign.X.to_numpy())
    w = campaign.treatment
    assert list(campaign.X.columns) == [f"x{j}" for j in range(1, 9)]
    np.testing.assert_allclose(campaign.tau[:, 0], tau)
    # b is the mean of the two potential outcomes, so mu0 = b - tau/2 and mu1 = b + tau/2.
    np.testing.assert_allclose(campaign.mu0, b - tau / 2.0)
    np.testing.assert_allclose(campaign.propensity_matrix[:, 1], e)
    # With sigma = 0 the outcome is exactly b + (W - 0.5) tau.
    np.testing.assert_allclose(campaign.y, b + (w - 0.5) * tau, atol=1e-12)


def test_covariate_distributions_follow_the_setups() -> None:
    uniform = nie_wager("A", 20000, random_state=0).X.to_numpy()
    assert uniform.min() >= 0.0 and uniform.max() <= 1.0
    # U[0,1] has mean 1/2 and variance 1/12; N(0,1) has mean 0 and variance 1.
    np.testing.assert_allclose(uniform.mean(axis=0), 0.5, atol=0.01)
    np.testing.assert_allclose(uniform.var(axis=0), 1.0 / 12.0, atol=0.005)
    normal = nie_wager("D", 20000, random_state=0).X.to_numpy()
    np.testing.assert_allclose(normal.mean(axis=0), 0.0, atol=0.03)
    np.testing.assert_allclose(normal.var(axis=0), 1.0, atol=0.04)


def test_noise_level_is_sigma() -> None:
    campaign = nie_wager("B", 50000, sigma=2.0, random_state=1)
    residual = campaign.y - campaign.expected_outcomes()[np.arange(50000), campaign.treatment]
    # The sample sd of 50,000 normal draws is within 1% of sigma with near certainty.
    assert residual.std() == pytest.approx(2.0, rel=0.01)


@pytest.mark.parametrize(
    ("kwargs", "match"),
    [
        ({"setup": "E"}, "setup 'E' does not exist"),
        ({"setup": "A", "d": 4}, "d=4 features is too few"),
        ({"setup": "A", "sigma": -1.0}, "sigma=-1.0 is not a noise level"),
        ({"setup": "A", "n": 0}, "n=0 is not a usable row count"),
    ],
)
def test_bad_arguments_are_refused(kwargs: dict[str, object], match: str) -> None:
    with pytest.raises(DataError, match=match):
        nie_wager(**kwargs)  # type: ignore[arg-type]
