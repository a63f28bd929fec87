"""The Larkspur Tea Club demo campaign (fictional): columns, missing values, groups."""

from __future__ import annotations

import pandas as pd
import pytest

from service.simulation import larkspur_campaign
from service.simulation.larkspur import _customer_ids

FEATURES = [
    "tenure_months",
    "monthly_spend",
    "cups_logged_last_30d",
    "support_tickets_90d",
    "plan",
    "region",
    "signup_channel",
]


@pytest.fixture(scope="module")
def demo() -> pd.DataFrame:
    return larkspur_campaign(20_000, random_state=0).to_frame(truth=True)


def test_demo_columns_and_labels(demo: pd.DataFrame) -> None:
    assert list(demo.columns[:10]) == ["customer_id", *FEATURES, "treatment", "renewed"]
    assert set(demo["treatment"]) == {"none", "email", "call"}
    assert demo["customer_id"].str.fullmatch(r"LTC-\d{6}").all()
    assert demo["customer_id"].is_unique


def test_demo_has_categorical_columns_with_their_levels(demo: pd.DataFrame) -> None:
    assert set(demo["plan"]) == {"sampler", "classic", "connoisseur"}
    assert set(demo["region"].dropna()) == {"north", "south", "east", "west"}
    assert demo["signup_channel"].nunique() >= 3
    for column in ("plan", "region", "signup_channel"):
        assert not pd.api.types.is_numeric_dtype(demo[column]), column


def test_demo_has_missing_values_where_stated(demo: pd.DataFrame) -> None:
    missing = demo.isna().mean()
    assert 0.04 < missing["monthly_spend"] < 0.08
    assert 0.02 < missing["region"] < 0.06
    assert missing.drop(["monthly_spend", "region"]).eq(0).all()


def test_demo_features_are_plausible(demo: pd.DataFrame) -> None:
    assert demo["tenure_months"].between(1, 120).all()
    assert demo["cups_logged_last_30d"].between(0, 120).all()
    assert (demo["support_tickets_90d"] >= 0).all()
    spend = demo.groupby("plan")["monthly_spend"].median()
    assert spend["sampler"] < spend["classic"] < spend["connoisseur"]


def test_demo_avoids_protected_attributes(demo: pd.DataFrame) -> None:
    forbidden = ("age", "gender", "sex", "ethnic", "race", "religion", "birth", "nationality")
    assert not [c for c in demo.columns for word in forbidden if word in c.lower()]


def test_groups_are_driven_by_the_features(demo: pd.DataFrame) -> None:
    # The story of the demo: ticket-heavy customers are often sleeping dogs, gift
    # sign-ups often lost causes, heavy tea drinkers often sure things.
    share = pd.crosstab(demo["support_tickets_90d"] >= 3, demo["group"], normalize="index")
    assert share.loc[True, "sleeping_dog"] > 3 * share.loc[False, "sleeping_dog"]
    share = pd.crosstab(demo["signup_channel"] == "gift", demo["group"], normalize="index")
    assert share.loc[True, "lost_cause"] > 2 * share.loc[False, "lost_cause"]
    heavy = demo["cups_logged_last_30d"] >= demo["cups_logged_last_30d"].quantile(0.8)
    share = pd.crosstab(heavy, demo["group"], normalize="index")
    assert share.loc[True, "sure_thing"] > 2 * share.loc[False, "sure_thing"]


def test_vouchers_win_the_price_sensitive_and_calls_the_big_spenders(demo: pd.DataFrame) -> None:
    persuadable = demo[demo["group"] == "persuadable"]
    edge = persuadable["true_uplift_email"] - persuadable["true_uplift_call"]
    cheap = persuadable["plan"] == "sampler"
    assert edge[cheap].mean() > 0 > edge[persuadable["plan"] == "connoisseur"].mean()


def test_ids_widen_for_large_campaigns() -> None:
    assert _customer_ids(3).tolist() == ["LTC-000001", "LTC-000002", "LTC-000003"]
    ids = _customer_ids(1_000_000)
    assert ids[0] == "LTC-0000001" and ids[-1] == "LTC-1000000"
