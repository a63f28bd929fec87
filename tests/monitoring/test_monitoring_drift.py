"""PSI: a hand-computed example, scipy's KL divergence as reference, binning, drift levels."""

from __future__ import annotations

import math

import numpy as np
import pandas as pd
import pytest
from scipy.stats import entropy

import service.monitoring as monitoring
from service.errors import DataError
from service.monitoring import PSI_ACT, PSI_WATCH, binned, compare_to_reference, psi, psi_level
from service.registry import categorical_reference, numeric_reference


def test_public_names_are_exported() -> None:
    for name in monitoring.__all__:
        assert hasattr(monitoring, name)


def test_hand_computed_psi() -> None:
    # (0.20 - 0.25) ln(0.20/0.25) + (0.30 - 0.25) ln(0.30/0.25) + 0 = 0.05 ln 1.25 + 0.05 ln 1.2
    expected = 0.05 * math.log(1.25) + 0.05 * math.log(1.2)
    assert psi([0.25, 0.25, 0.5], [0.2, 0.3, 0.5]) == pytest.approx(expected)
    assert expected == pytest.approx(0.020273, abs=1e-6)
    assert psi([0.3, 0.7], [0.3, 0.7]) == 0.0


def test_psi_is_the_symmetric_kl_divergence_of_scipy() -> None:
    # Reference: scipy.stats.entropy(p, q) is KL(p || q); PSI = KL(a||e) + KL(e||a).
    rng = np.random.default_rng(0)
    e, a = rng.dirichlet(np.ones(10)), rng.dirichlet(np.ones(10))
    assert psi(e, a) == pytest.approx(entropy(a, e) + entropy(e, a), rel=1e-12)


def test_empty_bin_gets_the_floor_not_infinity() -> None:
    value = psi([0.5, 0.5, 0.0], [0.4, 0.4, 0.2])
    assert math.isfinite(value) and value > PSI_ACT


def test_thresholds_and_levels() -> None:
    assert (PSI_WATCH, PSI_ACT) == (0.1, 0.25)
    assert [psi_level(v) for v in (0.0, 0.099, 0.1, 0.249, 0.25, 3.0)] == [
        "stable", "stable", "watch", "watch", "act", "act",
    ]  # fmt: skip


def test_missing_values_are_a_bin_of_their_own() -> None:
    reference = numeric_reference(np.r_[np.arange(1.0, 11.0), [np.nan] * 10])  # 50% missing
    labels, expected, actual = binned(reference, np.arange(1.0, 11.0))  # none missing
    assert labels[-1] == "missing" and expected[-1] == pytest.approx(0.5) and actual[-1] == 0.0
    assert sum(expected) == pytest.approx(1.0) and sum(actual) == pytest.approx(1.0)


def test_unseen_categories_are_pooled() -> None:
    reference = categorical_reference(["a"] * 50 + ["b"] * 50)
    labels, expected, actual = binned(reference, ["a"] * 50 + ["c"] * 50)
    assert labels == ["a", "b", "__other__", "missing"]
    assert expected == pytest.approx([0.5, 0.5, 0.0, 0.0])
    assert actual == pytest.approx([0.5, 0.0, 0.5, 0.0])


def test_same_population_is_stable_and_a_shift_is_flagged() -> None:
    rng = np.random.default_rng(1)
    train = pd.DataFrame(
        {"spend": rng.lognormal(3, 0.5, 5000), "plan": rng.choice(["a", "b"], 5000)}
    )
    reference = {
        "features": {
            "spend": numeric_reference(train["spend"]),
            "plan": categorical_reference(train["plan"]),
        },
        "score": {"email": numeric_reference(rng.normal(0.05, 0.02, 5000))},
    }
    same = pd.DataFrame(
        {"spend": rng.lognormal(3, 0.5, 2000), "plan": rng.choice(["a", "b"], 2000)}
    )
    report = compare_to_reference(reference, same, {"email": rng.normal(0.05, 0.02, 2000)})
    assert report.level == "stable" and len(report.items) == 3
    shifted = same.assign(spend=same["spend"] * 1.8)
    report = compare_to_reference(reference, shifted, {"email": rng.normal(0.08, 0.02, 2000)})
    worst = {i.name: i.level for i in report.items}
    assert worst["spend"] == "act" and worst["email"] == "act" and worst["plan"] == "stable"
    assert report.items[0].psi >= report.items[-1].psi  # worst first
    assert report.to_dict()["thresholds_note"].endswith("common practice, no source.")


def test_unusable_reference_is_refused() -> None:
    with pytest.raises(DataError, match="reference"):
        compare_to_reference({}, pd.DataFrame({"x": [1.0]}))
    with pytest.raises(DataError, match="kind"):
        binned({"kind": "weird"}, [1.0])
