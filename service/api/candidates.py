"""Turn the two batch forms (rows or columns) into ids, a feature table and values."""

from __future__ import annotations

from typing import Any

from service.api.errors import ApiError
from service.api.schemas import BatchScoreRequest
from service.scoring import FeatureSchema, FeatureTable, InvalidFeatures
from service.scoring.features import number_problem

__all__ = ["Candidates", "batch_size", "candidates", "check_batch_size"]

_MAX_ID = 256

Candidates = tuple[list[str], FeatureTable, list[Any] | None]


def batch_size(body: BatchScoreRequest) -> int:
    """Number of customers in a batch request, either form."""
    if body.customers is not None:
        return len(body.customers)
    columns = body.columns or {}
    return len(columns.get("id", ()))


def check_batch_size(body: BatchScoreRequest, limit: int) -> int:
    """The batch length, or a 413 when it exceeds ``limit``."""
    n = batch_size(body)
    if n > limit:
        raise ApiError(
            413,
            "batch_too_large",
            f"The batch holds {n} customers, above the limit of {limit} (UPSHOT_MAX_BATCH); "
            "split it into smaller requests.",
            {"count": n, "limit": limit},
        )
    return n


def candidates(body: BatchScoreRequest, schema: FeatureSchema) -> Candidates:
    """Ids, validated features and per-customer values (None = the campaign's value)."""
    if body.customers is not None:
        ids = [c.id for c in body.customers]
        table = schema.table_from_rows([c.features for c in body.customers])
        given: list[Any] = [c.value for c in body.customers]
        return ids, table, given if any(v is not None for v in given) else None
    columns: dict[str, list[Any]] = dict(body.columns or {})
    raw_ids = columns.pop("id", None)
    if raw_ids is None:
        raise InvalidFeatures(
            [{"row": None, "feature": "id", "problem": "is required in column form: a list "
              "with one customer id (text) per customer"}]
        )  # fmt: skip
    ids = _ids(raw_ids)
    values = columns.pop("value", None)
    if values is not None and len(values) != len(ids):
        raise InvalidFeatures(
            [{"row": None, "feature": "value", "problem": f"has {len(values)} entries for "
              f"{len(ids)} ids; send one per customer (null for the campaign's value)"}]
        )  # fmt: skip
    if values is not None:
        _check_values(values)
    return ids, schema.table_from_columns(columns, len(ids)), values


def _check_values(values: list[Any]) -> None:
    problems = []
    for i, v in enumerate(values):
        if v is None:
            continue
        problem = number_problem(v, missing="null for the campaign's value")
        if problem is None and v <= 0:
            problem = f"must be a number > 0, got {v!r}; send null for the campaign's value"
        if problem is not None:
            problems.append({"row": i, "feature": "value", "problem": problem})
    if problems:
        raise InvalidFeatures(problems)


def _ids(raw: list[Any]) -> list[str]:
    problems = [
        {"row": i, "feature": "id", "problem": f"must be non-empty text of at most {_MAX_ID} "
         f"characters, got {v!r}"}
        for i, v in enumerate(raw)
        if type(v) is not str or not v or len(v) > _MAX_ID
    ]  # fmt: skip
    if problems:
        raise InvalidFeatures(problems)
    return raw
