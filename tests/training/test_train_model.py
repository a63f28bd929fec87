"""train_model writes a complete, honest bundle, or nothing at all."""

from __future__ import annotations

import shutil
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd
import pytest

from service.evaluation import auuc, qini_coefficient
from service.registry import ModelRegistry
from service.training import train as train_module
from service.training import train_model
from service.uplift import make_learner

FAST: dict[str, Any] = {"learner": "t", "base": "linear", "n_bootstrap": 2, "n_splits": 3}


def _train(frame: pd.DataFrame, root: Path, **kwargs: Any) -> Any:
    options = {**FAST, **kwargs}
    return train_model(
        frame, treatment="treatment", outcome="renewed", name="tea", models_dir=root, **options
    )


@pytest.fixture(scope="module")
def result(tmp_path_factory: pytest.TempPathFactory, campaign: pd.DataFrame) -> Any:
    return _train(
        campaign, tmp_path_factory.mktemp("train") / "models", cost={"email": 0.1, "call": 1.5}
    )


def test_manifest_carries_what_other_parts_rely_on(result: Any) -> None:
    m = result.manifest
    for key in (
        "format_version",
        "name",
        "version",
        "features",
        "outcome_type",
        "control",
        "arms",
        "learner",
        "metrics",
        "reference",
        "created_at",
        "artifacts",
        "serving",
        "libraries",
        "training_data",
        "manifest_sha256",
    ):
        assert key in m, key
    assert (m["name"], m["version"], m["control"]) == ("tea", "v0001", "none")
    assert m["arms"] == ["call", "email"] == list(result.model.arms_)
    assert m["outcome_type"] == "binary"
    assert m["features"] == [s.to_dict() for s in result.model.encoder_.specs]
    assert "customer_id" in m["training_data"]["ignored_columns"]
    assert m["learner"]["name"] == "t" and m["learner"]["base"] == "linear"
    assert m["serving"]["forms"]["full"]["file"] == "model.joblib"
    assert m["economics"] == {"value": 1.0, "cost": {"call": 1.5, "email": 0.1}}
    assert m["created_at"].endswith("Z")
    for entry in m["artifacts"].values():
        assert len(entry["sha256"]) == 64


def test_reference_distributions_are_proper_shares(result: Any, campaign: pd.DataFrame) -> None:
    reference = result.manifest["reference"]
    assert set(reference["features"]) == {f["name"] for f in result.manifest["features"]}
    for ref in [*reference["features"].values(), *reference["score"].values()]:
        shares = ref["shares"].values() if ref["kind"] == "categorical" else ref["shares"]
        assert sum(shares) == pytest.approx(1.0)
    spend = reference["features"]["monthly_spend"]
    assert spend["missing"] == pytest.approx(campaign["monthly_spend"].isna().mean())
    # Decile edges: about a tenth of the values in each bin (common practice, no source).
    assert len(spend["edges"]) == 9
    assert max(spend["shares"]) < 0.15
    plan = reference["features"]["plan"]["shares"]
    observed = campaign["plan"].value_counts(normalize=True)
    assert plan == pytest.approx({k: float(observed[k]) for k in plan})


def test_group_counts_and_rates_match_the_data(result: Any, campaign: pd.DataFrame) -> None:
    groups = result.manifest["training_data"]["groups"]
    expected = campaign.groupby("treatment")["renewed"].agg(["size", "mean"])
    for label, row in expected.iterrows():
        assert groups[label]["rows"] == row["size"]
        assert groups[label]["outcome_mean"] == pytest.approx(row["mean"])


def test_manifest_qini_equals_the_one_recomputed_from_saved_oof(result: Any) -> None:
    registry = ModelRegistry(result.path.parent.parent)
    oof = registry.out_of_fold("tea", "v0001")
    for j, arm in enumerate(oof.arms):
        saved = result.manifest["metrics"]["arms"][arm]
        args = (oof.y, oof.treatment, oof.scores[:, j])
        pair = {"control": "none", "arm": arm}
        assert qini_coefficient(*args, **pair) == pytest.approx(saved["qini_normalized"], 1e-12)
        assert qini_coefficient(*args, **pair, normalize=False) == pytest.approx(saved["qini"])
        assert auuc(*args, **pair) == pytest.approx(saved["auuc"], rel=1e-12)


def test_saved_predictions_are_truly_out_of_fold(result: Any, campaign: pd.DataFrame) -> None:
    # Refit on every fold but one: the held-out rows get exactly the saved scores, and
    # they differ from the final model's in-sample scores.
    oof = ModelRegistry(result.path.parent.parent).out_of_fold("tea", "v0001")
    held = oof.fold == 0
    features = result.manifest["training_data"]["columns"]["features"]
    learner = make_learner("t", base="linear", control="none", arms=oof.arms, random_state=0)
    learner.fit(campaign.loc[~held, features], oof.y[~held], oof.treatment[~held])
    np.testing.assert_allclose(learner.predict(campaign.loc[held, features]), oof.scores[held])
    assert not np.allclose(result.model.predict(campaign[features])[held], oof.scores[held])


def test_each_training_writes_a_new_version_and_numbers_are_never_reused(
    tmp_path: Path, tiny: pd.DataFrame
) -> None:
    root = tmp_path / "models"
    assert _train(tiny, root).version == "v0001"
    assert _train(tiny, root).version == "v0002"
    shutil.rmtree(root / "tea" / "v0002")
    assert _train(tiny, root).version == "v0003"
    assert ModelRegistry(root).versions("tea") == ["v0001", "v0003"]


def test_failure_while_writing_leaves_no_partial_bundle(
    tmp_path: Path, tiny: pd.DataFrame, monkeypatch: pytest.MonkeyPatch
) -> None:
    root = tmp_path / "models"
    _train(tiny, root)

    def broken(*args: object, **kwargs: object) -> None:
        raise RuntimeError("disk full while drawing the report")

    monkeypatch.setattr(train_module, "write_report", broken)
    with pytest.raises(RuntimeError, match="disk full"):
        _train(tiny, root)
    assert sorted(p.name for p in (root / "tea").iterdir()) == [".lock", "history.jsonl", "v0001"]
    with pytest.raises(RuntimeError, match="disk full"):
        train_model(
            tiny,
            treatment="treatment",
            outcome="renewed",
            name="fresh",
            models_dir=root,
            **FAST,
        )
    assert not (root / "fresh").exists()
    assert ModelRegistry(root).versions("tea") == ["v0001"]


def test_labels_read_as_floats_become_integers(tmp_path: Path, campaign: pd.DataFrame) -> None:
    frame = campaign[campaign["treatment"] != "call"].copy()
    frame["contacted"] = (frame.pop("treatment") == "email").astype(float)
    result = train_model(
        frame, treatment="contacted", outcome="renewed", name="mail", models_dir=tmp_path, **FAST
    )
    assert (result.manifest["control"], result.manifest["arms"]) == (0, [1])


@pytest.mark.slow
def test_auto_selects_the_best_cross_validated_qini(
    tmp_path: Path, campaign: pd.DataFrame
) -> None:
    result = _train(campaign, tmp_path, learner="auto")
    selection = result.manifest["selection"]
    assert selection["mode"] == "auto"
    assert set(selection["scores"]) == {"t", "s", "x", "dr", "r", "transformed"}
    best = max(selection["scores"], key=selection["scores"].get)
    assert result.manifest["learner"]["name"] == best
    mean_qini = np.mean(
        [m["qini_normalized"] for m in result.manifest["metrics"]["arms"].values()]
    )
    assert mean_qini == pytest.approx(selection["scores"][best])
