"""Fuzz the real service (uvicorn on loopback) with schemathesis, bounded for the suite.

Every operation of the OpenAPI document gets generated requests, valid and
schema-violating, with an admin key and with no key; none may answer 5xx or break the
declared contract. ``python bench/fuzz.py`` runs the same harness for >= 20,000 requests.
"""

from __future__ import annotations

import http.client
from collections.abc import Iterator
from pathlib import Path

import httpx
import pytest
from api_fuzz import DEMO_CAMPAIGN, fuzz, key_headers, serve


@pytest.fixture(scope="module")
def url(trained_models: Path, tmp_path_factory: pytest.TempPathFactory) -> Iterator[str]:
    with serve(trained_models, tmp_path_factory.mktemp("fuzz")) as base:
        yield base


def test_fuzzed_requests_get_no_server_error_and_keep_the_contract(url: str) -> None:
    result = fuzz(url, max_examples=10, headers=key_headers("admin", "none"))
    assert result.server_errors == 0, result.examples
    assert result.violations == 0, result.examples
    assert len(result.by_operation) == 13, result.by_operation  # 12 JSON ones and /metrics
    assert result.requests >= 300
    assert result.statuses[401] > 0 and result.statuses[422] > 0


def test_the_checks_catch_a_response_that_breaks_the_declared_schema(url: str) -> None:
    doc = httpx.get(f"{url}/openapi.json").json()
    doc["paths"] = {"/healthz": doc["paths"]["/healthz"]}
    doc["components"]["schemas"]["Health"]["properties"]["status"]["enum"] = ["fine"]
    result = fuzz(url, max_examples=2, headers=key_headers("none"), document=doc)
    assert result.requests >= 1 and result.violations == result.requests
    assert "fine" in result.examples[0]


def test_the_documented_examples_work_without_edits(url: str) -> None:
    doc = httpx.get(f"{url}/openapi.json").json()
    admin = key_headers("admin")["admin"]
    sent = 0
    for path, operations in doc["paths"].items():
        for method, op in operations.items():
            examples = op.get("requestBody", {}).get("content", {}).get("application/json", {})
            for example in examples.get("examples", {}).values():
                target = path.replace("{name}", "larkspur").replace("{campaign_id}", DEMO_CAMPAIGN)
                response = httpx.request(
                    method, f"{url}{target}", json=example["value"], headers=admin
                )
                assert response.status_code == 200, (path, response.text)
                sent += 1
    assert sent == 6


def test_refused_inputs_keep_the_connection_open(url: str) -> None:
    # The probe's reproducers: each answered 500 and reset the keep-alive connection.
    host, port = url.removeprefix("http://").split(":")
    connection = http.client.HTTPConnection(host, int(port), timeout=30)
    headers = {"Content-Type": "application/json", **key_headers("scorer")["scorer"]}
    c = '{"campaign":"' + DEMO_CAMPAIGN + '",'
    huge = "1" + "0" * 309
    bodies = [
        ("/v1/rank", c + '"capacity":18446744073709551616,"customers":[{"id":"D5"}]}'),
        ("/v1/score", c + '"customer":{"id":"D6","features":{"tenure_months":' + huge + "}}}"),
        ("/v1/score", c + '"customer":{"id":"D7","features":{}}}'),
    ]
    statuses, sockets = [], set()
    for path, body in bodies:
        connection.request("POST", path, body=body, headers=headers)
        response = connection.getresponse()
        response.read()
        statuses.append(response.status)
        assert response.getheader("connection") != "close"
        sockets.add(id(connection.sock))
    connection.close()
    assert statuses == [422, 422, 200]
    assert len(sockets) == 1
