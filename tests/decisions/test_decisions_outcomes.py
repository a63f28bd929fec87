"""Outcomes by decision id on both engines: idempotent, all-or-nothing on conflict,
unknown ids reported, impossible values refused, corrections kept with who and why."""

from __future__ import annotations

from collections.abc import Callable, Iterator

import pytest

from service.decisions import MAX_AMOUNT, DecisionLog, DecisionRecord
from service.decisions.outcomes import (
    Outcome,
    OutcomeConflict,
    outcomes_from_rows,
    parse_outcome,
)
from service.errors import ConflictError, DataError, NotFoundError

Store = tuple[DecisionLog, list[str]]


@pytest.fixture
def store(location: str, make_record: Callable[..., DecisionRecord]) -> Iterator[Store]:
    records = [make_record(i) for i in range(5)]
    with DecisionLog.open(location) as log:
        log.append_sync(records)
        yield log, [r.decision_id for r in records]


def _rows(log: DecisionLog) -> list[tuple[str, float | None]]:
    rows = log.iter_joined("larkspur-renewal", ("decision_id", "outcome"), with_outcome=True)
    return sorted(row for chunk in rows for row in chunk)  # type: ignore[misc]


def _binary(name: str, version: str) -> str:
    assert (name, version) == ("larkspur", "v0001")
    return "binary"


def test_record_then_same_again_is_a_no_op(store: Store) -> None:
    log, ids = store
    sent = [Outcome(ids[0], 1.0, "2026-03-02T10:00:00.000000+00:00"), Outcome(ids[1], 0.0)]
    first = log.record_outcomes(sent)
    assert (first.recorded, first.unchanged, first.unknown) == ([ids[0], ids[1]], [], [])
    again = log.record_outcomes(sent)
    assert (again.recorded, again.unchanged) == ([], [ids[0], ids[1]])
    assert log.outcome(ids[0]) == sent[0] and log.counts().outcomes == 2


def test_a_conflict_refuses_the_whole_request(store: Store) -> None:
    log, ids = store
    log.record_outcomes([Outcome(ids[0], 1.0)])
    before = _rows(log)
    with pytest.raises(OutcomeConflict, match="differ from the ones already recorded") as err:
        log.record_outcomes([Outcome(ids[2], 1.0), Outcome(ids[0], 0.0), Outcome(ids[3], 0.0)])
    assert isinstance(err.value, ConflictError)
    assert err.value.details["conflicts"][0]["decision_id"] == ids[0]
    assert _rows(log) == before  # ids[2] and ids[3] were not stored either


def test_two_different_outcomes_in_one_request_conflict(store: Store) -> None:
    log, ids = store
    with pytest.raises(OutcomeConflict, match="two different outcomes"):
        log.record_outcomes([Outcome(ids[0], 1.0), Outcome(ids[1], 1.0), Outcome(ids[0], 0.0)])
    assert _rows(log) == []
    receipt = log.record_outcomes([Outcome(ids[0], 1.0), Outcome(ids[0], 1.0)])
    assert (receipt.recorded, receipt.unchanged) == ([ids[0]], [ids[0]])


def test_observation_time_must_agree_when_both_are_given(store: Store) -> None:
    log, ids = store
    log.record_outcomes([Outcome(ids[0], 1.0, "2026-03-02T10:00:00.000000+00:00")])
    assert log.record_outcomes([Outcome(ids[0], 1.0)]).unchanged == [ids[0]]  # time unknown
    with pytest.raises(OutcomeConflict):
        log.record_outcomes([Outcome(ids[0], 1.0, "2026-03-03T10:00:00.000000+00:00")])


def test_unknown_ids_are_reported_and_the_rest_stored(store: Store) -> None:
    log, ids = store
    receipt = log.record_outcomes([Outcome("no-such-decision", 1.0), Outcome(ids[4], 12.5)])
    assert receipt.unknown == ["no-such-decision"] and receipt.recorded == [ids[4]]
    assert receipt.to_dict() == {
        "recorded": 1, "unchanged": 0, "unknown": 1, "unknown_ids": ["no-such-decision"],
    }  # fmt: skip
    assert _rows(log) == [(ids[4], 12.5)]


@pytest.mark.parametrize("value", [2.0, -5.0, 0.5])
def test_a_binary_decision_refuses_anything_but_0_and_1(store: Store, value: float) -> None:
    log, ids = store
    with pytest.raises(
        DataError, match=rf"Outcome {value:g} of decision '{ids[1]}' is impossible"
    ):
        log.record_outcomes([Outcome(ids[0], 1.0), Outcome(ids[1], value)], _binary)
    assert _rows(log) == []  # nothing of the request
    # Without a known type (e.g. a deleted model version) amounts are accepted.
    assert log.record_outcomes([Outcome(ids[1], value)], lambda n, v: None).recorded == [ids[1]]


def test_a_correction_is_explicit_and_audited(store: Store) -> None:
    log, ids = store
    log.record_outcomes([Outcome(ids[0], 1.0, "2026-03-02T10:00:00.000000+00:00")])
    with pytest.raises(OutcomeConflict):  # a plain resend never overwrites
        log.record_outcomes([Outcome(ids[0], 0.0)])
    done = log.correct_outcome(
        Outcome(ids[0], 0.0), actor="ana", reason="CRM sent the wrong customer", kinds=_binary
    )
    assert (done.previous.outcome, done.outcome.outcome, done.actor) == (1.0, 0.0, "ana")
    assert log.outcome(ids[0]) == Outcome(ids[0], 0.0, None)
    history = log.corrections(ids[0])
    assert [h.to_dict() for h in history] == [done.to_dict()]
    assert history[0].previous.observed_at == "2026-03-02T10:00:00.000000+00:00"
    assert log.counts().corrections == 1
    with pytest.raises(DataError, match=r"Outcome 3 of decision .* is impossible"):
        log.correct_outcome(Outcome(ids[0], 3.0), actor="ana", reason="x", kinds=_binary)
    with pytest.raises(DataError, match=r"non-empty reason"):
        log.correct_outcome(Outcome(ids[0], 1.0), actor="ana", reason=" ")
    with pytest.raises(NotFoundError, match=r"has no recorded outcome to correct"):
        log.correct_outcome(Outcome(ids[1], 1.0), actor="ana", reason="late")
    assert len(log.corrections(ids[0])) == 1


def test_parsing_normalises_and_names_the_problem() -> None:
    o = parse_outcome("d1", True, "2026-03-02T12:00:00+02:00")
    assert (o.outcome, o.observed_at) == (1.0, "2026-03-02T10:00:00.000000+00:00")
    assert parse_outcome("d1", 3, "2026-03-02T10:00Z").observed_at.endswith("+00:00")  # type: ignore[union-attr]
    with pytest.raises(DataError, match="finite number"):
        parse_outcome("d1", float("nan"))
    with pytest.raises(DataError, match="finite number"):
        parse_outcome("d1", "1")
    with pytest.raises(DataError, match=r"outcome 1e\+308 of decision 'd1' is beyond"):
        parse_outcome("d1", 1e308)
    assert parse_outcome("d1", -MAX_AMOUNT).outcome == -MAX_AMOUNT
    with pytest.raises(DataError, match="no UTC offset"):
        parse_outcome("d1", 1, "2026-03-02T10:00:00")
    with pytest.raises(DataError, match="row 2: decision_id"):
        outcomes_from_rows([{"decision_id": "a", "outcome": 1}, {"outcome": 0}], where="file")
