"""Decision ids and record validation."""

from __future__ import annotations

import math
from collections.abc import Callable

import numpy as np
import pytest

from service.decisions import DecisionRecord, decision_id, utc_now
from service.decisions.record import engine_row, from_row, to_row
from service.errors import DataError

RecordFactory = Callable[..., DecisionRecord]

FEATURES = {"tenure_months": 14, "plan": "classic", "monthly_spend": 21.5}


def _id(**changes: object) -> str:
    args: dict[str, object] = {
        "campaign": "larkspur-renewal",
        "customer_id": "LTC-000001",
        "policy_hash": "abc",
        "model": "larkspur/v0001",
        "features": FEATURES,
        "value": 40.0,
    }
    args.update(changes)
    return decision_id(**args)  # type: ignore[arg-type]


def test_decision_id_is_deterministic_and_canonical() -> None:
    assert _id() == _id()
    assert len(_id()) == 32
    # Feature order does not matter; the (name, version) pair equals "name/version".
    reordered = dict(reversed(list(FEATURES.items())))
    assert _id(features=reordered) == _id()
    assert _id(model=("larkspur", "v0001")) == _id()
    # An integer value is the same value as its float.
    assert _id(value=40) == _id()


@pytest.mark.parametrize(
    "change",
    [
        {"campaign": "other"},
        {"customer_id": "LTC-000002"},
        {"policy_hash": "abd"},
        {"model": "larkspur/v0002"},
        {"features": {**FEATURES, "tenure_months": 15}},
        {"value": 41.0},
    ],
)
def test_decision_id_changes_with_every_input(change: dict[str, object]) -> None:
    assert _id(**change) != _id()


def test_rows_round_trip_to_equal_records(make_record: RecordFactory) -> None:
    record = make_record(5, created_at="2026-03-01T10:00:00+01:00")
    back = from_row(to_row(record))
    # Times are stored in UTC.
    assert back.created_at == "2026-03-01T09:00:00.000000+00:00"
    assert back == make_record(5, created_at=back.created_at)


def test_numpy_numbers_are_accepted(make_record: RecordFactory) -> None:
    record = make_record(1, tau=np.array([0.05, 0.12], dtype=np.float32), mu0=np.float64(0.4))
    back = from_row(to_row(record))
    assert back.tau == pytest.approx([0.05, 0.12], abs=1e-7) and back.mu0 == 0.4


@pytest.mark.parametrize(
    ("changes", "match"),
    [
        ({"action": "letter"}, r"field 'action' = 'letter' must be one of"),
        ({"mode": "batch"}, r"field 'mode' = 'batch'"),
        ({"propensity": 0.5}, r"field 'propensity' = 0.5 must equal action_probs\[action\]"),
        ({"propensity": math.nan}, r"field 'propensity' = nan must be a finite number"),
        ({"tau": [0.1]}, r"field 'tau' has 1 entries for 2 arms"),
        ({"high": [0.1, math.inf]}, r"field 'high' = inf must be a finite number"),
        ({"action_probs": {"none": 0.2, "email": 0.8}}, r"field 'action_probs' must map"),
        (
            {"action_probs": {"none": 0.3, "email": 0.8, "call": 0.05}},
            r"must hold probabilities in \[0, 1\] that sum to 1",
        ),
        ({"created_at": "2026-03-01T09:00:00"}, r"field 'created_at' has no UTC offset"),
        ({"created_at": "yesterday"}, r"field 'created_at' = 'yesterday' is not ISO 8601"),
        ({"customer_id": ""}, r"field 'customer_id' = '' must be a non-empty string"),
        ({"explored": 1}, r"field 'explored' must be true or false"),
        ({"features": {"when": object()}}, r"field 'features' cannot be stored as JSON"),
        ({"arms": ["email", "none"], "tau": [0, 0]}, r"field 'arms'"),
    ],
)
def test_invalid_records_name_the_field(
    make_record: RecordFactory, changes: dict[str, object], match: str
) -> None:
    record: DecisionRecord = make_record(1, **changes)
    with pytest.raises(DataError, match=match):
        to_row(record)
    # The one-customer path's quick check hands every such record to to_row's checks.
    with pytest.raises(DataError, match=match):
        engine_row(record)


@pytest.mark.parametrize(
    "changes",
    [
        {},
        {"action": "none", "expected_value": 0.0, "propensity": 0.15},
        {"explored": True, "holdout": True, "do_not_contact": True},
        {"tau": np.array([0.05, 0.12], dtype=np.float32)},  # not Python floats: to_row's way
        {"created_at": "2026-03-01T10:00:00+01:00"},  # not UTC: to_row converts it
        {"value": 40},  # an integer value is stored as its float
    ],
)
def test_the_quick_row_equals_the_checked_row(
    make_record: RecordFactory, changes: dict[str, object]
) -> None:
    for i in range(3):
        record = make_record(i, **changes)
        assert engine_row(record) == to_row(record)


def test_utc_now_is_iso_with_offset() -> None:
    assert utc_now().endswith("+00:00")
