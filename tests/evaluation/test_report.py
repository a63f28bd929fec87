"""evaluate_uplift: one JSON-ready summary per arm, consistent with the single metrics."""

from __future__ import annotations

import json

import numpy as np
import pandas as pd
import pytest

from service.errors import DataError
from service.evaluation import auuc, evaluate_uplift, qini_coefficient, uplift_at_top


def _three_arms() -> dict[str, np.ndarray]:
    rng = np.random.default_rng(21)
    n = 1500
    treatment = rng.choice(np.array(["none", "mail", "call"]), n)
    x = rng.uniform(size=n)
    lift = np.where(treatment == "mail", 0.2 * x, np.where(treatment == "call", 0.1 - 0.2 * x, 0))
    y = (rng.uniform(size=n) < 0.2 + lift).astype(int)
    return {"y": y, "treatment": treatment, "x": x}


def test_summary_matches_single_metrics_per_arm() -> None:
    data = _three_arms()
    scores = np.column_stack([0.2 * data["x"], 0.1 - 0.2 * data["x"]])
    summary = evaluate_uplift(data["y"], data["treatment"], scores, ["mail", "call"], "none")
    assert list(summary) == ["mail", "call"]
    for j, arm in enumerate(["mail", "call"]):
        pick = {"control": "none", "arm": arm}
        args = (data["y"], data["treatment"], scores[:, j])
        entry = summary[arm]
        assert entry["qini"] == qini_coefficient(*args, **pick, normalize=False)
        assert entry["qini_normalized"] == qini_coefficient(*args, **pick)
        assert entry["auuc"] == auuc(*args, **pick)
        top = uplift_at_top(*args, 0.2, **pick)
        second = entry["uplift_at_top"][1]
        assert second["fraction"] == 0.2
        assert (second["estimate"], second["low"], second["high"]) == (
            top.estimate,
            top.low,
            top.high,
        )
        assert (
            entry["n_treated"] + entry["n_control"]
            == np.isin(data["treatment"], [arm, "none"]).sum()
        )
    # The right score for each arm ranks better than chance.
    assert summary["mail"]["qini_normalized"] > 0 and summary["call"]["qini_normalized"] > 0


def test_summary_is_json_serialisable_with_none_for_undefined() -> None:
    y = [0, 0, 0, 0, 0, 0]
    treatment = ["a", "c", "a", "c", "a", "c"]
    summary = evaluate_uplift(y, treatment, {"a": [3, 2, 1, 0, 5, 4]}, ["a"], "c", top=[0.1])
    text = json.dumps(summary, allow_nan=False)
    assert json.loads(text)["a"]["qini_normalized"] is None


def test_scores_as_mapping_frame_or_matrix_agree() -> None:
    data = _three_arms()
    frame = pd.DataFrame({"mail": data["x"], "call": -data["x"]})
    args = (data["y"], data["treatment"])
    by_frame = evaluate_uplift(*args, frame, ["mail", "call"], "none")
    by_dict = evaluate_uplift(
        *args, {"call": -data["x"], "mail": data["x"]}, ["mail", "call"], "none"
    )
    by_matrix = evaluate_uplift(*args, frame.to_numpy(), ["mail", "call"], "none")
    assert by_frame == by_dict == by_matrix


def test_scores_shape_must_match_arms() -> None:
    data = _three_arms()
    with pytest.raises(DataError, match=r"scores has shape \(1500, 2\) but 1 arms"):
        evaluate_uplift(data["y"], data["treatment"], np.zeros((1500, 2)), ["mail"], "none")
    with pytest.raises(DataError, match=r"scores has no column for arms \['call'\]"):
        evaluate_uplift(
            data["y"], data["treatment"], {"mail": data["x"]}, ["mail", "call"], "none"
        )
    with pytest.raises(DataError, match="arms is empty"):
        evaluate_uplift(data["y"], data["treatment"], {}, [], "none")
