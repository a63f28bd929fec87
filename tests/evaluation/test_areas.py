"""Qini coefficient and AUUC: worked example, oracle = 1, random scores about 0."""

from __future__ import annotations

import numpy as np
import pytest

from service.errors import DataError
from service.evaluation import auuc, qini_coefficient


def test_qini_coefficient_matches_hand_computation(worked: dict[str, np.ndarray]) -> None:
    # Trapezoids under the Qini curve of test_curves (x: 0 .2 .3 .6 .7 .8 1):
    #   .2*(0+1)/2 + .1*(1+2)/2 + .3*(2+1)/2 + .1*(1+5/3)/2 + .1*(5/3+4/3)/2 + .2*(4/3+1)/2
    #   = 0.1 + 0.15 + 0.45 + 4/30 + 0.15 + 7/30 = 73/60
    # Random line (0,0)-(1,1) has area 1/2, so the coefficient is 73/60 - 30/60 = 43/60.
    assert qini_coefficient(**worked, normalize=False) == pytest.approx(43 / 60, rel=1e-14)
    # Perfect curve (0,0) (.3,3) (.8,3) (1,1): 0.45 + 1.5 + 0.4 = 2.35, minus 1/2 = 1.85.
    # Normalised: (43/60) / (111/60) = 43/111.
    assert qini_coefficient(**worked) == pytest.approx(43 / 111, rel=1e-14)


def test_auuc_matches_hand_computation(worked: dict[str, np.ndarray]) -> None:
    # Trapezoids under the uplift curve of test_curves, divided by N = 10:
    #   .2*(0+2)/2 + .1*(2+3)/2 + .3*(3+1.5)/2 + .1*(1.5+35/12)/2 + .1*(35/12+32/15)/2
    #   + .2*(32/15+2)/2 = 0.2 + 0.25 + 0.675 + 53/240 + 303/1200 + 62/150
    expected = (0.2 + 0.25 + 0.675 + 53 / 240 + 303 / 1200 + 62 / 150) / 10
    assert auuc(**worked) == pytest.approx(expected, rel=1e-14)


def _oracle_campaign(n_up: int, n_zero_t: int, n_zero_c: int, n_down: int) -> tuple:
    """Rows whose true effect ordering is the perfect ordering.

    tau = +1 rows are all treated and respond (no control persuadables); tau = -1 rows
    are all in control and respond (no treated sleeping dogs); tau = 0 rows never respond.
    """
    tau = np.repeat([1.0, 0.0, 0.0, -1.0], [n_up, n_zero_t, n_zero_c, n_down])
    treatment = np.repeat([1, 1, 0, 0], [n_up, n_zero_t, n_zero_c, n_down])
    y = np.repeat([1, 0, 0, 1], [n_up, n_zero_t, n_zero_c, n_down])
    order = np.random.default_rng(11).permutation(len(y))
    return y[order], treatment[order], tau[order]


def test_oracle_scores_normalised_qini_of_exactly_one() -> None:
    y, treatment, tau = _oracle_campaign(120, 700, 650, 90)
    assert qini_coefficient(y, treatment, tau) == 1.0


def test_random_scores_average_about_zero() -> None:
    rng = np.random.default_rng(2024)
    n = 3000
    treatment = rng.integers(0, 2, n)
    effect = rng.uniform(-0.1, 0.3, n)
    y = (rng.uniform(size=n) < 0.2 + effect * treatment).astype(int)
    values = [qini_coefficient(y, treatment, rng.permutation(n)) for _ in range(200)]
    # Random targeting should be no better than the random line (Radcliffe 2007).
    assert abs(np.mean(values)) < 0.05
    # A score that knows the effect beats every random one by far.
    assert qini_coefficient(y, treatment, effect) > max(values)


def test_reversed_oracle_scores_below_random() -> None:
    # The worst ordering is not exactly -1: the N_T/N_C rescaling makes the Qini curve
    # asymmetric, so only the sign is checked.
    y, treatment, tau = _oracle_campaign(50, 200, 200, 40)
    assert qini_coefficient(y, treatment, -tau) < 0.0


def test_normalised_qini_undefined_without_outcome_variation() -> None:
    with pytest.raises(DataError, match="normalised Qini is undefined"):
        qini_coefficient([0, 0, 0, 0], [1, 0, 1, 0], [0.1, 0.2, 0.3, 0.4])
    assert qini_coefficient([0, 0, 0, 0], [1, 0, 1, 0], [0.1, 0.2, 0.3, 0.4], normalize=False) == 0
