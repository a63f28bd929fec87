"""SimulatedCampaign: shape checks, the expected-outcome matrix and the CSV table."""

from __future__ import annotations

import dataclasses

import numpy as np
import pandas as pd
import pytest

from service.errors import DataError
from service.simulation import SimulatedCampaign, simulate


def _tiny(**changes: object) -> SimulatedCampaign:
    fields: dict[str, object] = {
        "X": pd.DataFrame({"x1": [0.1, 0.2, 0.3]}),
        "treatment": np.array([0, 1, 1]),
        "y": np.array([1.0, 0.0, 1.0]),
        "tau": np.array([[0.1], [0.2], [-0.1]]),
        "mu0": np.array([0.5, 0.4, 0.6]),
        "propensity": np.array([0.5, 0.5, 0.5]),
        "propensity_matrix": np.full((3, 2), 0.5),
        "control": 0,
        "arms": (1,),
        "outcome_type": "binary",
        "name": "tiny",
    }
    fields.update(changes)
    return SimulatedCampaign(**fields)  # type: ignore[arg-type]


def test_expected_outcomes_add_the_uplift_to_the_control_mean() -> None:
    mu = _tiny().expected_outcomes()
    np.testing.assert_allclose(mu, [[0.5, 0.6], [0.4, 0.6], [0.6, 0.5]])


def test_a_misshaped_field_is_refused() -> None:
    with pytest.raises(DataError, match="'tau' has shape \\(3,\\), but \\(3, 1\\)"):
        _tiny(tau=np.array([0.1, 0.2, -0.1]))
    with pytest.raises(DataError, match="'groups' has shape \\(2,\\)"):
        _tiny(groups=np.array(["a", "b"]))


def test_campaign_is_frozen() -> None:
    with pytest.raises(dataclasses.FrozenInstanceError):
        _tiny().name = "other"  # type: ignore[misc]


def test_frame_has_features_treatment_outcome_and_optional_truth() -> None:
    campaign = simulate("groups_two_arms", 200, random_state=1)
    plain = campaign.to_frame()
    assert list(plain.columns) == [*campaign.X.columns, "treatment", "outcome"]
    assert plain["outcome"].dtype == np.int64
    np.testing.assert_array_equal(plain["outcome"].to_numpy(), campaign.y)
    full = campaign.to_frame(truth=True)
    truth = ["true_uplift_email", "true_uplift_call", "true_mu0", "propensity", "group"]
    assert list(full.columns)[-5:] == truth
    np.testing.assert_array_equal(full["true_uplift_call"].to_numpy(), campaign.tau[:, 1])


def test_frame_round_trips_through_csv(tmp_path: pytest.TempPathFactory) -> None:
    campaign = simulate("larkspur", 300, random_state=2)
    path = tmp_path / "larkspur.csv"  # type: ignore[operator]
    campaign.to_frame(truth=True).to_csv(path, index=False)
    back = pd.read_csv(path)
    assert list(back.columns)[:2] == ["customer_id", "tenure_months"]
    assert back["customer_id"].tolist() == campaign.ids.tolist()  # type: ignore[union-attr]
    np.testing.assert_allclose(back["true_uplift_email"], campaign.tau[:, 0])
    assert back["treatment"].tolist() == campaign.treatment.tolist()
    assert back["renewed"].isin([0, 1]).all()


def test_continuous_outcome_is_written_as_float() -> None:
    frame = simulate("nw_b", 50, random_state=0).to_frame(truth=True)
    assert frame["outcome"].dtype == np.float64
    assert "true_uplift_1" in frame.columns and "group" not in frame.columns


def test_column_name_clash_is_refused() -> None:
    campaign = _tiny(X=pd.DataFrame({"outcome": [1.0, 2.0, 3.0]}))
    with pytest.raises(DataError, match=r"\['outcome'\] appear twice"):
        campaign.to_frame()
