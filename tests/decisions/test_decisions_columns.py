"""Decisions in column form: the same rows and the same checks as one record at a time."""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import replace

import numpy as np
import pytest

from service.decisions import DecisionColumns, DecisionLog, DecisionRecord
from service.decisions.record import to_row
from service.errors import DataError

RecordFactory = Callable[..., DecisionRecord]
CREATED = "2026-03-01T09:00:00.000000+00:00"


def _records(make_record: RecordFactory, n: int = 5) -> list[DecisionRecord]:
    return [make_record(i, created_at=CREATED) for i in range(n)]


def test_rows_equal_the_record_rows(make_record: RecordFactory) -> None:
    records = _records(make_record)
    records[2] = replace(
        records[2], action="none", propensity=0.15, holdout=True, tau=[-0.5, 1e-17]
    )
    columns = DecisionColumns.from_records(records)
    columns.check()
    assert list(columns.rows()) == [to_row(r) for r in records]
    assert columns.checked_rows == [to_row(r) for r in records]
    assert columns.records() == records


def test_a_mixed_batch_is_refused(make_record: RecordFactory) -> None:
    records = _records(make_record)
    records[1] = replace(records[1], campaign="other")
    with pytest.raises(DataError, match="separate batches"):
        DecisionColumns.from_records(records)


@pytest.mark.parametrize(
    ("field", "bad", "message"),
    [
        ("tau", np.array([[0.1, np.nan]] * 5), "'tau' must hold finite numbers"),
        ("action_probs", np.array([[0.5, 0.5, 0.5]] * 5), "sum to 1"),
        ("action", np.array([0, 1, 3, 0, 0]), "'action' must index"),
        ("decision_id", ["a", "b", "", "d", "e"], "'decision_id' must be a non-empty"),
        ("created_at", "2026-03-01T09:00:00", "no UTC offset"),
    ],
)
def test_check_names_the_field(
    make_record: RecordFactory, field: str, bad: object, message: str
) -> None:
    columns = replace(DecisionColumns.from_records(_records(make_record)), **{field: bad})
    with pytest.raises(DataError, match=message):
        columns.check()
    for _ in range(2):  # checked_rows checks too, every time: a refusal is not cached
        with pytest.raises(DataError, match=message):
            columns.checked_rows  # noqa: B018


def test_a_zero_propensity_is_refused(make_record: RecordFactory) -> None:
    columns = DecisionColumns.from_records(_records(make_record))
    probs = columns.action_probs.copy()
    probs[3] = [0.0, 0.0, 1.0]  # action of row 3 is "email", given probability 0
    with pytest.raises(DataError, match=f"{columns.decision_id[3]!r}: field 'propensity'"):
        replace(columns, action_probs=probs).check()


def test_the_log_appends_columns(location: str, make_record: RecordFactory) -> None:
    records = _records(make_record)
    with DecisionLog.open(location) as log:
        log.append_columns_sync([DecisionColumns.from_records(records)])
        log.append_columns_sync([DecisionColumns.from_records(records)])  # a retry: no change
        assert log.records_written == len(records)
        assert [log.get(r.decision_id) for r in records] == [
            replace(r, created_at=CREATED) for r in records
        ]


def test_rows_equal_the_record_rows_for_awkward_labels_and_numbers(
    make_record: RecordFactory,
) -> None:
    # Arm labels that need escaping or sort differently by case and accent; numbers at
    # the edges of float formatting. The column-wise JSON must equal orjson's per row.
    arms = ["e%s,mail", "Call", "télé"]
    probs = {"none": 0.1, "e%s,mail": 0.2, "Call": 0.3, "télé": 0.4}
    records = [
        replace(
            make_record(i, created_at=CREATED),
            arms=arms,
            action="télé",
            propensity=0.4,
            action_probs=probs,
            tau=[5e-324, -0.0, 1e300 * (i + 1)],
            low=[-1.0, 0.1 + 0.2, 3.0],
            high=[1.0, 2.0, 1e-17 * i],
        )  # fmt: skip
        for i in range(4)
    ]
    columns = DecisionColumns.from_records(records)
    columns.check()
    assert list(columns.rows()) == [to_row(r) for r in records]
