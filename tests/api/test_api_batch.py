"""POST /v1/score/batch: rows or columns, the same decisions as one at a time."""

from __future__ import annotations

from collections.abc import Callable
from typing import Any

import httpx
import pytest
from api_support import CAMPAIGN, columns_of, customers, features_of, started

from service.config import Settings
from service.decisions import DecisionLog

pytestmark = pytest.mark.anyio


async def _batch(http: httpx.AsyncClient, **body: Any) -> httpx.Response:
    return await http.post("/v1/score/batch", json={"campaign": CAMPAIGN, **body})


def _rows(ids: list[str], frame: Any) -> list[dict[str, Any]]:
    return [{"id": cid, "features": features_of(frame, i)} for i, cid in enumerate(ids)]


async def test_rows_columns_and_single_calls_agree(
    client: httpx.AsyncClient, log: DecisionLog
) -> None:
    ids, frame = customers(40, seed=11)
    rows = await _batch(client, customers=_rows(ids, frame))
    cols = await _batch(client, columns=columns_of(ids, frame))
    assert rows.status_code == cols.status_code == 200, (rows.text, cols.text)
    by_row = rows.json()["decisions"]
    by_col = cols.json()["columns"]
    assert rows.json()["count"] == cols.json()["count"] == 40
    assert [d["decision_id"] for d in by_row] == by_col["decision_id"]
    assert [d["action"] for d in by_row] == by_col["action"]
    assert [d["propensity"] for d in by_row] == pytest.approx(by_col["propensity"])
    assert log.records_written == 40, "the second batch repeats the first and logs nothing new"
    for i in (0, 17, 39):
        single = await client.post(
            "/v1/score",
            json={
                "campaign": CAMPAIGN,
                "customer": {"id": ids[i], "features": features_of(frame, i)},
            },
        )
        one = single.json()
        assert one["decision_id"] == by_row[i]["decision_id"]
        assert one["action"] == by_row[i]["action"]
        assert one["uplift"] == pytest.approx(by_row[i]["uplift"], abs=1e-12)
        assert one["reasons"] == by_row[i]["reasons"]
    arms = cols.json()["arms"]
    assert set(arms) == {"email", "call"}
    assert arms["email"]["uplift"] == pytest.approx(
        [next(a for a in d["arms"] if a["arm"] == "email")["uplift"] for d in by_row]
    )


async def test_one_bad_row_rejects_the_whole_batch(
    client: httpx.AsyncClient, log: DecisionLog
) -> None:
    ids, frame = customers(10, seed=12)
    columns = columns_of(ids, frame)
    columns["tenure_months"][7] = "seven"
    response = await client.post(
        "/v1/score/batch", json={"campaign": CAMPAIGN, "columns": columns}
    )
    assert response.status_code == 422
    problem = response.json()["error"]["details"]["problems"][0]
    assert problem == {"row": 7, "feature": "tenure_months", "problem": problem["problem"]}
    assert log.records_written == 0


@pytest.mark.parametrize(
    ("mutate", "words"),
    [
        (lambda c: c.pop("id"), "'id'"),
        (lambda c: c["plan"].pop(), "has 4 values but there are 5 ids"),
        (lambda c: c.update(colour=["x"] * 5), "'colour'"),
        (lambda c: c.update(value=[1.0, 2.0]), "'value'"),
        (lambda c: c["id"].__setitem__(2, 17), "'id'"),
        # Entries are checked by the feature schema (not by the body model): any JSON
        # value in any column is refused with its row and feature.
        (lambda c: c.update(plan="family"), "column 'plan' must be a list"),
        (lambda c: c.update(id={"a": 1}), "column 'id' must be a list"),
        (lambda c: c["tenure_months"].__setitem__(1, [3]), "'tenure_months'"),
        (lambda c: c["plan"].__setitem__(0, {"x": 1}), "'plan'"),
        (lambda c: c["id"].__setitem__(0, ["a"]), "'id'"),
        (lambda c: c.update(value=[None, [1], 2.0, 3.0, 4.0]), "'value'"),
    ],
)
async def test_malformed_columns_are_refused(
    client: httpx.AsyncClient, mutate: Callable[[dict[str, Any]], object], words: str
) -> None:
    ids, frame = customers(5, seed=13)
    columns = columns_of(ids, frame)
    mutate(columns)
    response = await client.post(
        "/v1/score/batch", json={"campaign": CAMPAIGN, "columns": columns}
    )
    assert response.status_code == 422, response.text
    assert words in response.json()["error"]["message"]


async def test_exactly_one_form_is_required(client: httpx.AsyncClient) -> None:
    response = await client.post("/v1/score/batch", json={"campaign": CAMPAIGN})
    assert response.status_code == 422
    assert "exactly one of" in response.json()["error"]["message"]


async def test_batch_length_and_body_size_are_capped(
    make_settings: Callable[..., Settings], log: DecisionLog
) -> None:
    ids, frame = customers(200, seed=14)
    settings = make_settings(max_batch=20, max_body_bytes=4096)
    async with started(settings, log=log) as http:
        small = columns_of(ids[:25], frame.iloc[:25])
        small = {"id": small["id"], "tenure_months": small["tenure_months"]}
        too_many = await http.post(
            "/v1/score/batch", json={"campaign": CAMPAIGN, "columns": small}
        )
        assert too_many.status_code == 413
        assert too_many.json()["error"]["code"] == "batch_too_large"
        big = await _batch(http, columns=columns_of(ids, frame))
        assert big.status_code == 413
        assert big.json()["error"]["code"] == "payload_too_large"
        assert "4096" in big.json()["error"]["message"]
    assert log.records_written == 0


async def test_per_customer_values_in_column_form(client: httpx.AsyncClient) -> None:
    ids, frame = customers(3, seed=15)
    columns = columns_of(ids, frame)
    columns["value"] = [None, 5.0, 500.0]
    response = await client.post(
        "/v1/score/batch", json={"campaign": CAMPAIGN, "columns": columns}
    )
    assert response.status_code == 200
    arms = response.json()["arms"]["call"]
    # EV = value * uplift - cost with the campaign's value (40) where none is given.
    for value, uplift, ev in zip((40.0, 5.0, 500.0), arms["uplift"], arms["expected_value"],
                                 strict=True):  # fmt: skip
        assert ev == pytest.approx(value * uplift - 3.50)
