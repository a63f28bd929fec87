"""Qini, uplift and perfect curves against the definitions, worked by hand."""

from __future__ import annotations

import numpy as np
import pytest

from service.evaluation import perfect_qini_curve, qini_curve, uplift_curve

# Cumulative counts after each whole tie group of the ``worked`` table (see conftest):
#   group  x    N_T  N_C  Y_T  Y_C
#   start  0.0  0    0    0    0
#   1 A,B  0.2  1    1    1    0
#   2 C    0.3  2    1    2    0
#   3 DEF  0.6  4    2    3    1
#   4 G    0.7  4    3    3    1
#   5 H    0.8  5    3    3    1
#   6 I,J  1.0  5    5    3    2
X = [0.0, 0.2, 0.3, 0.6, 0.7, 0.8, 1.0]


def test_qini_curve_matches_hand_computation(worked: dict[str, np.ndarray]) -> None:
    # Q(k) = Y_T - Y_C * N_T / N_C (Radcliffe 2007):
    expected = [
        0.0,  # nothing targeted
        1.0,  # 1 - 0 * 1/1
        2.0,  # 2 - 0 * 2/1
        1.0,  # 3 - 1 * 4/2
        5 / 3,  # 3 - 1 * 4/3
        4 / 3,  # 3 - 1 * 5/3
        1.0,  # 3 - 2 * 5/5
    ]
    curve = qini_curve(**worked)
    np.testing.assert_allclose(curve.x, X, rtol=0, atol=1e-15)
    np.testing.assert_allclose(curve.y, expected, rtol=1e-15)


def test_uplift_curve_matches_hand_computation(worked: dict[str, np.ndarray]) -> None:
    # U(k) = (Y_T/N_T - Y_C/N_C) * (N_T + N_C) (Rzepakowski & Jaroszewicz 2012):
    expected = [
        0.0,
        2.0,  # (1/1 - 0/1) * 2
        3.0,  # (2/2 - 0/1) * 3
        1.5,  # (3/4 - 1/2) * 6
        35 / 12,  # (3/4 - 1/3) * 7
        32 / 15,  # (3/5 - 1/3) * 8
        2.0,  # (3/5 - 2/5) * 10
    ]
    curve = uplift_curve(**worked)
    np.testing.assert_allclose(curve.x, X, rtol=0, atol=1e-15)
    np.testing.assert_allclose(curve.y, expected, rtol=1e-15)


def test_uplift_curve_is_zero_while_an_arm_is_empty() -> None:
    # The top row is treated, so the control arm is empty at the first boundary.
    curve = uplift_curve([1, 0, 1, 0], [1, 0, 1, 0], [4.0, 3.0, 2.0, 1.0])
    assert curve.y[1] == 0.0
    # Qini keeps the treated responses there: no control outcomes to subtract yet.
    assert qini_curve([1, 0, 1, 0], [1, 0, 1, 0], [4.0, 3.0, 2.0, 1.0]).y[1] == 1.0


def test_perfect_curve_for_binary_outcome(worked: dict[str, np.ndarray]) -> None:
    # Treated responders A, C, F first (x = 0.3, Q = 3 with no control yet); then the
    # five others tied (x = 0.8, N_T = 5, N_C = 3, Y_C = 0, Q = 3); then control
    # responders D, I (x = 1, Q = 3 - 2 * 5/5 = 1).
    curve = perfect_qini_curve(worked["y"], worked["treatment"])
    np.testing.assert_allclose(curve.x, [0.0, 0.3, 0.8, 1.0], atol=1e-15)
    np.testing.assert_allclose(curve.y, [0.0, 3.0, 3.0, 1.0], rtol=1e-15)


def test_perfect_curve_for_continuous_outcome() -> None:
    # Treated by descending y (5, 2, 2 tied), then control by ascending y (1, 4).
    y = np.array([2.0, 4.0, 5.0, 1.0, 2.0])
    treatment = np.array([1, 0, 1, 0, 1])
    curve = perfect_qini_curve(y, treatment)
    np.testing.assert_allclose(curve.x, [0.0, 0.2, 0.6, 0.8, 1.0], atol=1e-15)
    # Q: 5; 9; control y=1 enters: 9 - 1 * 3/1 = 6; then 9 - 5 * 3/2 = 1.5.
    np.testing.assert_allclose(curve.y, [0.0, 5.0, 9.0, 6.0, 1.5], rtol=1e-15)


def test_curve_has_one_point_per_tie_group() -> None:
    score = [1.0, 1.0, 1.0, 1.0, 0.0, 0.0]
    curve = qini_curve([1, 0, 1, 0, 1, 0], [1, 1, 0, 0, 1, 0], score)
    assert curve.x.tolist() == pytest.approx([0.0, 4 / 6, 1.0])


def test_curve_arrays_are_read_only(worked: dict[str, np.ndarray]) -> None:
    curve = qini_curve(**worked)
    with pytest.raises(ValueError, match="read-only"):
        curve.y[0] = 1.0


def test_labels_select_one_arm_against_control() -> None:
    # Rows of the "call" arm are dropped when "mail" is compared with "none".
    treatment = np.array(["mail", "none", "call", "mail", "none", "call"])
    y = np.array([1, 0, 1, 0, 1, 1])
    score = np.array([0.5, 0.4, 0.9, 0.2, 0.1, 0.8])
    labelled = qini_curve(y, treatment, score, control="none", arm="mail")
    keep = treatment != "call"
    indicator = qini_curve(y[keep], (treatment[keep] == "mail").astype(int), score[keep])
    np.testing.assert_array_equal(labelled.x, indicator.x)
    np.testing.assert_array_equal(labelled.y, indicator.y)
