"""Reading and validating campaign tables, and the training-data fingerprint."""

from __future__ import annotations

from pathlib import Path
from typing import Any

import causaldata
import numpy as np
import pandas as pd
import pytest

from service.errors import DataError
from service.training import (
    TrainingData,
    data_fingerprint,
    prepare_training_data,
    read_table,
    train_model,
)


def _prepare(frame: pd.DataFrame, **kwargs: Any) -> TrainingData:
    options: dict[str, Any] = {"treatment": "treatment", "outcome": "renewed", **kwargs}
    return prepare_training_data(frame, **options)


def test_csv_and_parquet_of_the_same_table_share_a_fingerprint(
    tmp_path: Path, campaign: pd.DataFrame
) -> None:
    campaign.to_csv(tmp_path / "a.csv", index=False)
    campaign.to_parquet(tmp_path / "a.parquet")
    from_csv = data_fingerprint(_prepare(read_table(tmp_path / "a.csv")))
    from_parquet = data_fingerprint(_prepare(read_table(tmp_path / "a.parquet")))
    assert from_csv["sha256"] == from_parquet["sha256"]
    changed = campaign.copy()
    changed.loc[5, "tenure_months"] += 1
    assert data_fingerprint(_prepare(changed))["sha256"] != from_csv["sha256"]


def test_identifier_columns_are_left_out_by_default(campaign: pd.DataFrame) -> None:
    data = _prepare(campaign)
    assert data.ignored == ["customer_id"]
    assert "customer_id" not in data.X.columns
    chosen = _prepare(campaign, features=["plan", "tenure_months"])
    assert list(chosen.X.columns) == ["plan", "tenure_months"]


def test_control_given_as_text_matches_a_numeric_label(campaign: pd.DataFrame) -> None:
    frame = campaign.assign(
        treatment=campaign["treatment"].map({"none": 0, "email": 1, "call": 2})
    )
    data = _prepare(frame, control="0")
    assert data.control == 0 and data.arms == [1, 2]


@pytest.mark.parametrize(
    ("change", "message"),
    [
        ({"features": ["treatment"]}, "cannot also be a feature"),
        ({"outcome": "treatment"}, "both 'treatment'"),
        ({"control": "nobody"}, r"'nobody' does not occur in 'treatment'.*'call', 'email'"),
        ({"sample_weight": "plan"}, "Weight column 'plan'"),
        ({"propensity": "tenure_months"}, "cannot describe 2 contact arms"),
    ],
)
def test_column_roles_are_checked(
    campaign: pd.DataFrame, change: dict[str, object], message: str
) -> None:
    with pytest.raises(DataError, match=message):
        _prepare(campaign, **change)


def test_small_groups_and_constant_outcomes_are_refused(campaign: pd.DataFrame) -> None:
    few_calls = pd.concat(
        [
            campaign[campaign["treatment"] != "call"],
            campaign[campaign["treatment"] == "call"].head(10),
        ]
    )
    with pytest.raises(DataError, match=r"Group 'call' has 10 row\(s\); training needs at least"):
        _prepare(few_calls)
    never = campaign.assign(
        renewed=np.where(campaign["treatment"] == "none", 0, campaign["renewed"])
    )
    with pytest.raises(DataError, match="In group 'none' the outcome is always 0"):
        _prepare(never)
    missing = campaign.astype({"treatment": object})
    missing.loc[3, "treatment"] = None
    with pytest.raises(DataError, match=r"empty in 1 row\(s\) \(first: row 4 after the header"):
        _prepare(missing)


def test_propensity_of_the_received_group_becomes_the_full_matrix(
    campaign: pd.DataFrame,
) -> None:
    two = campaign[campaign["treatment"] != "call"].reset_index(drop=True)
    two = two.assign(p=np.where(two["treatment"] == "email", 0.7, 0.3))
    data = _prepare(two, propensity="p")
    np.testing.assert_allclose(data.propensity, np.tile([0.3, 0.7], (len(two), 1)))
    three = campaign.assign(p0=0.2, p1=0.4, p2=0.4)
    matrix = _prepare(three, propensity={"none": "p0", "call": "p1", "email": "p2"})
    np.testing.assert_allclose(matrix.propensity[0], [0.2, 0.4, 0.4])


def test_thornton_group_rates_match_the_published_experiment() -> None:
    # Thornton (2008), American Economic Review 98(5): about 34% of those offered no
    # incentive learned their HIV result, against about 79% of those offered any
    # incentive (from memory; the causaldata package ships the data).
    frame = causaldata.thornton_hiv.load_pandas().data.dropna(subset=["any", "got"])
    data = prepare_training_data(
        frame, treatment="any", outcome="got", features=["age", "distvct"]
    )
    groups = data_fingerprint(data)["groups"]
    assert (data.control, data.arms) == (0, [1])
    assert groups["0"]["outcome_mean"] == pytest.approx(0.34, abs=0.01)
    assert groups["1"]["outcome_mean"] == pytest.approx(0.79, abs=0.01)


def test_nsw_continuous_outcome_trains_and_matches_the_experimental_estimate(
    tmp_path: Path,
) -> None:
    # Dehejia & Wahba (1999) experimental NSW sample (causaldata's nsw_mixtape): the
    # difference in mean 1978 earnings is about $1,794 (the published experimental estimate).
    frame = causaldata.nsw_mixtape.load_pandas().data
    features = ["age", "educ", "black", "hisp", "marr", "nodegree", "re74", "re75"]
    result = train_model(
        frame,
        treatment="treat",
        outcome="re78",
        features=features,
        name="nsw",
        models_dir=tmp_path,
        learner="t",
        base="linear",
        n_bootstrap=2,
        n_splits=3,
    )
    m = result.manifest
    groups = m["training_data"]["groups"]
    assert m["outcome_type"] == "continuous"
    assert groups["1"]["outcome_mean"] - groups["0"]["outcome_mean"] == pytest.approx(1794, abs=1)
    assert m["metrics"]["arms"]["1"]["qini"] is not None
    assert result.report.is_file()
