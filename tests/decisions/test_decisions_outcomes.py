"""Outcomes by decision id: idempotent, all-or-nothing on conflict, unknown ids reported."""

from __future__ import annotations

import sqlite3
from pathlib import Path

import pytest

from service.decisions import DecisionLog
from service.decisions.outcomes import (
    Outcome,
    OutcomeConflict,
    OutcomeStore,
    outcomes_from_rows,
    parse_outcome,
)
from service.errors import ConflictError, DataError


@pytest.fixture
def store(tmp_path: Path, make_record) -> tuple[OutcomeStore, list[str]]:
    path = tmp_path / "log.sqlite3"
    records = [make_record(i) for i in range(5)]
    with DecisionLog.open(path) as log:
        log.append_sync(records)
    return OutcomeStore.open(path), [r.decision_id for r in records]


def _rows(path: Path) -> list[tuple[str, float, str | None]]:
    with sqlite3.connect(path) as conn:
        return conn.execute(
            "SELECT decision_id, outcome, observed_at FROM outcomes ORDER BY decision_id"
        ).fetchall()


def test_record_then_same_again_is_a_no_op(store) -> None:
    outcomes, ids = store
    sent = [Outcome(ids[0], 1.0, "2026-03-02T10:00:00.000000+00:00"), Outcome(ids[1], 0.0)]
    first = outcomes.record(sent)
    assert (first.recorded, first.unchanged, first.unknown) == ([ids[0], ids[1]], [], [])
    before = _rows(outcomes.path)
    again = outcomes.record(sent)
    assert (again.recorded, again.unchanged) == ([], [ids[0], ids[1]])
    assert _rows(outcomes.path) == before  # received_at untouched too
    assert outcomes.get(ids[0]) == sent[0] and outcomes.count() == 2


def test_a_conflict_refuses_the_whole_request(store) -> None:
    outcomes, ids = store
    outcomes.record([Outcome(ids[0], 1.0)])
    before = _rows(outcomes.path)
    with pytest.raises(OutcomeConflict, match="differ from the ones already recorded") as err:
        outcomes.record([Outcome(ids[2], 1.0), Outcome(ids[0], 0.0), Outcome(ids[3], 0.0)])
    assert isinstance(err.value, ConflictError)
    assert err.value.details["conflicts"][0]["decision_id"] == ids[0]
    assert _rows(outcomes.path) == before  # ids[2] and ids[3] were not stored either


def test_two_different_outcomes_in_one_request_conflict(store) -> None:
    outcomes, ids = store
    with pytest.raises(OutcomeConflict, match="two different outcomes"):
        outcomes.record([Outcome(ids[0], 1.0), Outcome(ids[1], 1.0), Outcome(ids[0], 0.0)])
    assert _rows(outcomes.path) == []
    receipt = outcomes.record([Outcome(ids[0], 1.0), Outcome(ids[0], 1.0)])
    assert (receipt.recorded, receipt.unchanged) == ([ids[0]], [ids[0]])


def test_observation_time_must_agree_when_both_are_given(store) -> None:
    outcomes, ids = store
    outcomes.record([Outcome(ids[0], 1.0, "2026-03-02T10:00:00.000000+00:00")])
    assert outcomes.record([Outcome(ids[0], 1.0)]).unchanged == [ids[0]]  # time unknown: agrees
    with pytest.raises(OutcomeConflict):
        outcomes.record([Outcome(ids[0], 1.0, "2026-03-03T10:00:00.000000+00:00")])


def test_unknown_ids_are_reported_and_the_rest_stored(store) -> None:
    outcomes, ids = store
    receipt = outcomes.record([Outcome("no-such-decision", 1.0), Outcome(ids[4], 12.5)])
    assert receipt.unknown == ["no-such-decision"] and receipt.recorded == [ids[4]]
    assert receipt.to_dict() == {
        "recorded": 1, "unchanged": 0, "unknown": 1, "unknown_ids": ["no-such-decision"],
    }  # fmt: skip
    assert [r[0] for r in _rows(outcomes.path)] == [ids[4]]


def test_parsing_normalises_and_names_the_problem() -> None:
    o = parse_outcome("d1", True, "2026-03-02T12:00:00+02:00")
    assert (o.outcome, o.observed_at) == (1.0, "2026-03-02T10:00:00.000000+00:00")
    assert parse_outcome("d1", 3, "2026-03-02T10:00Z").observed_at.endswith("+00:00")  # type: ignore[union-attr]
    with pytest.raises(DataError, match="finite number"):
        parse_outcome("d1", float("nan"))
    with pytest.raises(DataError, match="no UTC offset"):
        parse_outcome("d1", 1, "2026-03-02T10:00:00")
    with pytest.raises(DataError, match="row 2: decision_id"):
        outcomes_from_rows([{"decision_id": "a", "outcome": 1}, {"outcome": 0}], where="file")
