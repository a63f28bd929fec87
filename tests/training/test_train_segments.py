"""Segments, importance and tuning choices stored with a trained version."""

from __future__ import annotations

from pathlib import Path

import pandas as pd

from service.training import train_model


def test_manifest_holds_segments_importance_and_tuning(
    tmp_path: Path, campaign: pd.DataFrame
) -> None:
    result = train_model(
        campaign, treatment="treatment", outcome="renewed", name="tea", models_dir=tmp_path,
        learner="r", base="linear", n_bootstrap=2, n_splits=3,
    )  # fmt: skip
    manifest = result.manifest
    entry = manifest["segments"]
    assert entry["depth"] == 3 and entry["min_share"] == 0.05
    assert {s["arm"] for s in entry["segments"]} == {"email", "call"}
    assert "customer_id" not in entry["features"]
    assert set(manifest["importance"]["features"]) == set(entry["features"])
    # Roles with enough rows to hold a fifth out are tuned (the call arm has too few).
    tuned = set(manifest["learner"]["tuning"])
    assert {"outcome:0", "effect:1", "effect:2"} <= tuned
    assert tuned <= {"outcome:0", "outcome:1", "outcome:2", "effect:1", "effect:2"}
    page = result.report.read_text()
    assert "honest segments" in page and "Responsible use" in page


def test_untuned_training_records_no_choices(tmp_path: Path, campaign: pd.DataFrame) -> None:
    result = train_model(
        campaign, treatment="treatment", outcome="renewed", name="tea", models_dir=tmp_path,
        learner="t", base="linear", n_bootstrap=2, n_splits=3, tune=False,
    )  # fmt: skip
    assert result.manifest["learner"]["tuning"] == {}
    assert result.manifest["learner"]["params"]["tune"] is False
