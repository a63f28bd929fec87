"""A small typed client of the scoring service, for integrators (httpx).

>>> from service.client import UpshotClient
>>> with UpshotClient("http://127.0.0.1:8000", api_key="ups_...") as upshot:  # doctest: +SKIP
...     decision = upshot.score("larkspur-renewal", "LTC-000123", {"tenure_months": 14})
...     decision.action, decision.propensity

Every scoring call is safe to retry: the service answers a repeated request with the
same decision and ``decision_id`` and logs it once, so the client retries connection
failures and 502/503/504 answers (``retries`` times, with a short backoff).
"""

from __future__ import annotations

import time
from collections.abc import Mapping, Sequence
from types import TracebackType
from typing import Any, TypeVar

import httpx
from pydantic import BaseModel

from service.api.schemas import (
    BatchDecisions,
    CampaignList,
    Decision,
    DecisionColumns,
    ModelList,
    RankedList,
)
from service.errors import UpshotError

__all__ = ["ApiError", "UpshotClient"]

M = TypeVar("M", bound=BaseModel)

_RETRY_STATUS = frozenset({502, 503, 504})


class ApiError(UpshotError):
    """The service refused a request; ``code`` and ``details`` come from its error body."""

    def __init__(self, status: int, code: str, message: str, details: Any = None) -> None:
        super().__init__(f"{status} {code}: {message}")
        self.status = status
        self.code = code
        self.message = message
        self.details = details


class UpshotClient:
    """Call ``/v1/score``, ``/v1/score/batch``, ``/v1/rank``, ``/v1/models``, ``/v1/campaigns``.

    Parameters
    ----------
    base_url : str
        E.g. ``"http://127.0.0.1:8000"``.
    api_key : str, optional
        Sent as ``Authorization: Bearer <key>``.
    timeout : float, default 10
        Seconds per request (raise it for large batches).
    retries : int, default 2
        Extra attempts after a connection error or a 502/503/504 answer.
    transport : httpx.BaseTransport, optional
        For tests (e.g. ``httpx.MockTransport``) or custom networking.
    """

    def __init__(
        self,
        base_url: str,
        *,
        api_key: str | None = None,
        timeout: float = 10.0,
        retries: int = 2,
        transport: httpx.BaseTransport | None = None,
    ) -> None:
        headers = {"Authorization": f"Bearer {api_key}"} if api_key else {}
        self.retries = retries
        self._http = httpx.Client(
            base_url=base_url, headers=headers, timeout=timeout, transport=transport
        )

    def score(
        self,
        campaign: str,
        customer_id: str,
        features: Mapping[str, Any],
        *,
        value: float | None = None,
    ) -> Decision:
        """Decide for one customer."""
        customer: dict[str, Any] = {"id": customer_id, "features": dict(features)}
        if value is not None:
            customer["value"] = value
        return self._post("/v1/score", {"campaign": campaign, "customer": customer}, Decision)

    def score_batch(self, campaign: str, customers: Sequence[Mapping[str, Any]]) -> BatchDecisions:
        """Decide for many customers given as rows ``{"id", "features", "value"?}``."""
        body = {"campaign": campaign, "customers": [dict(c) for c in customers]}
        return self._post("/v1/score/batch", body, BatchDecisions)

    def score_columns(
        self, campaign: str, columns: Mapping[str, Sequence[Any]]
    ) -> DecisionColumns:
        """Decide for many customers given as columns (``"id"`` plus one list per feature)."""
        body = {"campaign": campaign, "columns": {k: list(v) for k, v in columns.items()}}
        return self._post("/v1/score/batch", body, DecisionColumns)

    def rank(
        self,
        campaign: str,
        *,
        customers: Sequence[Mapping[str, Any]] | None = None,
        columns: Mapping[str, Sequence[Any]] | None = None,
        capacity: int | None = None,
        budget: float | None = None,
    ) -> RankedList:
        """The contact list for candidates (rows or columns), cut at capacity/budget."""
        body: dict[str, Any] = {"campaign": campaign, "capacity": capacity, "budget": budget}
        if customers is not None:
            body["customers"] = [dict(c) for c in customers]
        if columns is not None:
            body["columns"] = {k: list(v) for k, v in columns.items()}
        return self._post("/v1/rank", body, RankedList)

    def models(self) -> ModelList:
        """The registered models, their versions and what serves each campaign."""
        return self._get("/v1/models", ModelList)

    def campaigns(self) -> CampaignList:
        """The campaigns as loaded, with the responsible-use notice."""
        return self._get("/v1/campaigns", CampaignList)

    def close(self) -> None:
        """Close the connection pool."""
        self._http.close()

    def __enter__(self) -> UpshotClient:
        return self

    def __exit__(
        self,
        exc_type: type[BaseException] | None,
        exc: BaseException | None,
        tb: TracebackType | None,
    ) -> None:
        self.close()

    def _get(self, path: str, model: type[M]) -> M:
        return self._send("GET", path, None, model)

    def _post(self, path: str, body: dict[str, Any], model: type[M]) -> M:
        return self._send("POST", path, body, model)

    def _send(self, method: str, path: str, body: dict[str, Any] | None, model: type[M]) -> M:
        for attempt in range(self.retries + 1):
            last = attempt == self.retries
            try:
                response = self._http.request(method, path, json=body)
            except httpx.TransportError:
                if last:
                    raise
            else:
                if response.status_code not in _RETRY_STATUS or last:
                    return _parse(response, model)
            time.sleep(0.05 * 2**attempt)
        raise AssertionError("unreachable: the last attempt returns or raises")


def _parse(response: httpx.Response, model: type[M]) -> M:
    if response.is_success:
        return model.model_validate_json(response.content)
    try:
        error = response.json()["error"]
        code, message, details = error["code"], error["message"], error.get("details")
    except (ValueError, KeyError, TypeError):
        code, message, details = "http_error", response.text[:500], None
    raise ApiError(response.status_code, code, message, details)
