"""Fidelity of a served form against the full one, on a worked example computed by hand."""

from __future__ import annotations

import numpy as np
import pytest
from scipy.stats import norm

from service.evaluation.fidelity import (
    FidelityThresholds,
    FormEstimates,
    form_fidelity,
    interval_coverage,
)

Z90 = float(norm.ppf(0.9))  # one-sided 0.90 bound: tau + 1.2816 sd


def _campaign(n: int = 400) -> tuple[np.ndarray, np.ndarray]:
    rng = np.random.default_rng(3)
    treatment = np.where(np.arange(n) % 2 == 0, "none", "mail").astype(object)
    y = (rng.random(n) < 0.3).astype(float)
    return y, treatment


def _fidelity(full: FormEstimates, served: FormEstimates, **kw: object) -> dict[str, object]:
    y, treatment = _campaign(len(full.tau))
    return form_fidelity(
        full, served, y=y, treatment=treatment, arms=["mail"], control="none",
        value=1.0, costs=np.zeros(1), **kw,  # type: ignore[arg-type]
    )  # fmt: skip


def test_identical_forms_agree_everywhere() -> None:
    tau = np.linspace(-0.2, 0.2, 400).reshape(-1, 1)
    same = FormEstimates(tau, np.full_like(tau, 0.05))
    result = _fidelity(same, same)
    assert result["passed"] and result["failures"] == []
    for level in result["levels"]:  # type: ignore[attr-defined]
        assert level["action_agreement"] == level["dnc_agreement"] == 1.0


def test_a_narrower_interval_flags_more_customers() -> None:
    # 400 customers, tau from -0.2 to 0.2 and sd 0.05 in the full form. Flagged at the
    # one-sided 0.90 level: tau + 1.2816 * sd < 0. Halving sd flags every customer with
    # -0.0641 <= tau < -0.0320 too: 32 of 400 by hand (tau step 0.4 / 399).
    tau = np.linspace(-0.2, 0.2, 400).reshape(-1, 1)
    full = FormEstimates(tau, np.full_like(tau, 0.05))
    served = FormEstimates(tau, np.full_like(tau, 0.025))
    result = _fidelity(full, served)
    level = next(lv for lv in result["levels"] if lv["confidence"] == 0.9)  # type: ignore[attr-defined]
    extra = int(np.sum((tau + Z90 * 0.025 < 0) & (tau + Z90 * 0.05 >= 0)))
    assert extra == 32
    assert level["dnc_agreement"] == pytest.approx(1 - extra / 400)
    # Their uplift is negative, so neither form contacts them: actions still agree.
    assert level["action_agreement"] == 1.0
    assert not result["passed"] and "dnc agreement" in result["failures"][0]  # type: ignore[index]
    assert result["qini"]["mail"]["difference"] == 0.0  # type: ignore[index]


def test_thresholds_are_recorded_and_applied() -> None:
    tau = np.linspace(-0.2, 0.2, 400).reshape(-1, 1)
    full = FormEstimates(tau, np.full_like(tau, 0.05))
    served = FormEstimates(tau, np.full_like(tau, 0.025))
    lenient = FidelityThresholds(dnc_agreement=0.5)
    result = _fidelity(full, served, thresholds=lenient)
    assert result["passed"] and result["thresholds"]["dnc_agreement"] == 0.5  # type: ignore[index]


def test_coverage_counts_cells_inside_the_interval() -> None:
    truth = np.array([[0.0], [0.1], [0.3]])
    tau = np.zeros((3, 1))
    sd = np.full((3, 1), 0.1)  # 95% half-width 0.196: covers 0.0 and 0.1, not 0.3
    assert interval_coverage(truth, tau, sd, 0.95) == pytest.approx(2 / 3)
