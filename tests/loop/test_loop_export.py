"""The training table exported from the log, its provenance, and training from it."""

from __future__ import annotations

import json

import numpy as np
import pandas as pd
import pytest
from loop_world import CAMPAIGN

from service.errors import DataError, NotFoundError
from service.loop import (
    export_from_log,
    export_training_table,
    read_logged,
    read_provenance,
    sidecar_path,
    training_arguments,
)
from service.training import read_table, train_model


def test_export_columns_weights_and_provenance(world, tmp_path) -> None:
    logged = read_logged(world.log_path, CAMPAIGN)
    result = export_training_table(logged, tmp_path / "log.csv")
    frame = read_table(result.path)
    assert result.rows == len(frame) == 6000 and result.without_outcome == 0
    features = training_arguments(result.provenance)["features"]
    assert sorted(features) == sorted(world.days[0].sim.X.columns)  # the features as scored
    for column in ("treatment", "outcome", "propensity", "p_none", "p_email", "p_call", "ipw"):
        assert column in frame
    np.testing.assert_allclose(frame["ipw"], 1.0 / frame["propensity"])
    chosen = frame[["p_none", "p_email", "p_call"]].to_numpy()
    column = frame["treatment"].map({"none": 0, "email": 1, "call": 2}).to_numpy()
    np.testing.assert_allclose(chosen[np.arange(len(frame)), column], frame["propensity"])
    provenance = read_provenance(result.path)
    assert provenance == result.provenance
    assert provenance is not None and provenance["campaign"] == CAMPAIGN
    assert provenance["decisions"] == 6000
    assert provenance["first_decision_at"] <= provenance["last_decision_at"]


def test_an_edited_table_is_not_passed_off_as_the_log(world, tmp_path) -> None:
    logged = read_logged(world.log_path, CAMPAIGN, since=world.boundaries[1])
    result = export_training_table(logged, tmp_path / "day2.parquet")
    assert read_provenance(result.path) is not None
    frame = pd.read_parquet(result.path)
    frame.loc[0, "outcome"] = 1 - frame.loc[0, "outcome"]
    frame.to_parquet(result.path, index=False)
    with pytest.raises(DataError, match="changed after it was exported"):
        read_provenance(result.path)
    sidecar_path(result.path).unlink()
    assert read_provenance(result.path) is None


def test_export_refuses_unknown_formats_and_empty_windows(world, tmp_path) -> None:
    logged = read_logged(world.log_path, CAMPAIGN)
    with pytest.raises(DataError, match=r"\.csv"):
        export_training_table(logged, tmp_path / "log.xlsx")
    none = logged.subset(np.zeros(len(logged), dtype=bool))
    with pytest.raises(DataError, match="post outcomes first"):
        export_training_table(none, tmp_path / "empty.csv")


def test_training_from_the_export_uses_the_inverse_propensity_weights(world, tmp_path) -> None:
    logged = read_logged(world.log_path, CAMPAIGN)
    result = export_training_table(logged, tmp_path / "log.csv")
    args = training_arguments(result.provenance)
    trained = train_model(
        read_table(result.path), **args, learner="t", base="linear", name="from-log",
        models_dir=tmp_path / "models", n_bootstrap=3, n_splits=3,
    )  # fmt: skip
    m = trained.manifest
    assert m["training_data"]["columns"]["sample_weight"] == "ipw"
    assert [f["name"] for f in m["features"]] == args["features"]
    assert set(m["arms"]) == {"email", "call"} and m["control"] == "none"
    assert (
        json.loads(sidecar_path(result.path).read_text())["sha256"] == result.provenance["sha256"]
    )


@pytest.mark.parametrize("name", ["log.csv.gz", "log.parquet"])
def test_streamed_export_matches_the_in_memory_one(world, tmp_path, name) -> None:
    logged = read_logged(world.log_path, CAMPAIGN)
    whole = export_training_table(logged, tmp_path / "whole" / name)
    # 700 rows a chunk: the 6,000 decisions are read and written in 9 pieces.
    streamed = export_from_log(world.log_path, CAMPAIGN, tmp_path / "streamed" / name, chunk=700)
    assert (streamed.rows, streamed.without_outcome) == (whole.rows, whole.without_outcome)
    a, b = read_table(whole.path), read_table(streamed.path)
    assert list(a.columns) == list(b.columns)
    pd.testing.assert_frame_equal(a, b, check_dtype=False)
    keep = ("decisions", "first_decision_at", "last_decision_at", "model_versions",
            "policy_hashes", "training", "campaign")  # fmt: skip
    assert {k: streamed.provenance[k] for k in keep} == {k: whole.provenance[k] for k in keep}
    assert read_provenance(streamed.path) == streamed.provenance
    assert not list((tmp_path / "streamed").glob("*.partial"))


def test_streamed_export_names_an_empty_window(world, tmp_path) -> None:
    with pytest.raises(NotFoundError, match="no decisions of campaign 'nope'"):
        export_from_log(world.log_path, "nope", tmp_path / "x.csv")
    assert not list(tmp_path.iterdir())
