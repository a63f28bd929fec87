"""One logged decision, its deterministic id, and its checked database row."""

from __future__ import annotations

import hashlib
import math
import re
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from datetime import UTC, datetime
from typing import Any

import orjson

from service.errors import DataError

__all__ = ["MODES", "DecisionRecord", "decision_id", "engine_row", "to_row", "utc_now"]

MODES = ("score", "rank")
_NO_CONTACT = "none"
_JSON = orjson.OPT_SORT_KEYS | orjson.OPT_SERIALIZE_NUMPY
# Rounding slack when checking that probabilities are consistent.
_PROB_SLACK = 1e-9
# A time exactly as utc_now() writes it (and to_row stores it).
_UTC_MICROS = re.compile(r"\d{4}-\d\d-\d\dT\d\d:\d\d:\d\d\.\d{6}\+00:00")


@dataclass(frozen=True, slots=True)
class DecisionRecord:
    """Everything retraining and off-policy evaluation need to know about one decision.

    ``tau``, ``low`` and ``high`` hold one entry per arm of ``arms``; ``action`` is an
    arm or ``"none"``; ``action_probs`` maps ``"none"`` and every arm to the probability
    the policy gave it, and ``propensity`` is ``action_probs[action]``; ``mode`` is
    ``"score"`` (one customer) or ``"rank"`` (a ranked list, probabilities given the cut).
    ``created_at`` is an ISO 8601 time with a UTC offset (see :func:`utc_now`).
    """

    decision_id: str
    created_at: str
    campaign: str
    customer_id: str
    model_name: str
    model_version: str
    policy_hash: str
    features: dict[str, Any]
    value: float
    arms: list[str]
    tau: list[float]
    low: list[float]
    high: list[float]
    mu0: float
    action: str
    expected_value: float
    explored: bool
    holdout: bool
    do_not_contact: bool
    propensity: float
    action_probs: dict[str, float]
    mode: str


def utc_now() -> str:
    """The current time as stored in the log: ISO 8601, UTC, microseconds."""
    return datetime.now(UTC).isoformat(timespec="microseconds")


def decision_id(
    campaign: str,
    customer_id: object,
    policy_hash: str,
    model: str | tuple[str, str],
    features: Mapping[str, Any],
    value: float,
    context: str = "score",
) -> str:
    """Deterministic id of a decision: the same request always maps to the same id.

    Hashes (BLAKE2b, 128 bits, hex) the canonical JSON (sorted keys) of the campaign,
    the customer id as text, the policy hash, the model (``"name/version"`` or a
    ``(name, version)`` pair, which is joined the same way), the features as scored and
    the value. A retried request therefore gets the id of its first attempt, and the log
    keeps only that first record. ``context`` separates decisions that share those
    inputs but not their meaning: ``"score"`` for a single or batch score, and for a
    ranked list ``"rank:"`` plus a hash of the list request (candidates, capacity,
    budget), since a place in a list depends on the other candidates.
    """
    if isinstance(model, tuple):
        model = "/".join(model)
    payload = [campaign, str(customer_id), policy_hash, model, dict(features), float(value)]
    if context != "score":  # ids of plain scores stay as they were
        payload.append(context)
    return hashlib.blake2b(orjson.dumps(payload, option=_JSON), digest_size=16).hexdigest()


def _fail(record: DecisionRecord, field: str, problem: str) -> DataError:
    return DataError(
        f"Decision {record.decision_id!r}: field {field!r} {problem}; nothing was logged."
    )


def _text(record: DecisionRecord, field: str) -> str:
    value = getattr(record, field)
    if not isinstance(value, str) or not value:
        raise _fail(record, field, f"= {value!r} must be a non-empty string")
    return value


def _number(record: DecisionRecord, field: str, value: object) -> float:
    if hasattr(value, "item") and not isinstance(value, int | float):
        value = value.item()
    if isinstance(value, bool) or not isinstance(value, int | float) or not math.isfinite(value):
        raise _fail(record, field, f"= {value!r} must be a finite number")
    return float(value)


def _numbers(record: DecisionRecord, field: str, size: int) -> list[float]:
    values = getattr(record, field)
    if isinstance(values, str | bytes | Mapping) or not hasattr(values, "__iter__"):
        raise _fail(record, field, "must be a list of numbers, one per arm")
    # NumPy scalars (float32, int64) become Python numbers through .item().
    items = [v.item() if hasattr(v, "item") else v for v in values]
    if len(items) != size:
        raise _fail(record, field, f"has {len(items)} entries for {size} arms")
    return [_number(record, field, v) for v in items]


def _timestamp(record: DecisionRecord) -> str:
    try:
        moment = datetime.fromisoformat(record.created_at)
    except (TypeError, ValueError) as err:
        raise _fail(record, "created_at", f"= {record.created_at!r} is not ISO 8601") from err
    if moment.tzinfo is None:
        raise _fail(record, "created_at", "has no UTC offset; use utc_now()")
    return moment.astimezone(UTC).isoformat(timespec="microseconds")


def _probabilities(record: DecisionRecord, labels: list[str]) -> dict[str, float]:
    probs = record.action_probs
    if not isinstance(probs, Mapping) or set(probs) != set(labels):
        raise _fail(record, "action_probs", f"must map exactly {labels} to probabilities")
    clean = {label: _number(record, "action_probs", probs[label]) for label in labels}
    if any(p < 0 or p > 1 for p in clean.values()) or abs(sum(clean.values()) - 1) > _PROB_SLACK:
        raise _fail(record, "action_probs", "must hold probabilities in [0, 1] that sum to 1")
    return clean


def to_row(record: DecisionRecord) -> tuple[Any, ...]:
    """Check a record and turn it into a database row; raise DataError naming the field."""
    fields = ("decision_id", "campaign", "customer_id", "model_name", "model_version")
    texts = [_text(record, name) for name in (*fields, "policy_hash")]
    arms = record.arms
    if not isinstance(arms, list | tuple) or not arms or not all(isinstance(a, str) for a in arms):
        raise _fail(record, "arms", "must be a non-empty list of arm labels")
    arms = list(arms)
    labels = [_NO_CONTACT, *arms]
    if len(set(labels)) != len(labels):
        raise _fail(record, "arms", f"= {arms!r} repeats a label or uses {_NO_CONTACT!r}")
    if record.action not in labels:
        raise _fail(record, "action", f"= {record.action!r} must be one of {labels}")
    if record.mode not in MODES:
        raise _fail(record, "mode", f"= {record.mode!r} must be one of {list(MODES)}")
    for flag in ("explored", "holdout", "do_not_contact"):
        if not isinstance(getattr(record, flag), bool):
            raise _fail(record, flag, "must be true or false")
    if not isinstance(record.features, Mapping):
        raise _fail(record, "features", "must be a mapping of feature name to value")
    probs = _probabilities(record, labels)
    propensity = _number(record, "propensity", record.propensity)
    if not 0 < propensity <= 1 or abs(propensity - probs[record.action]) > _PROB_SLACK:
        raise _fail(record, "propensity", f"= {propensity!r} must equal action_probs[action] > 0")
    try:
        features = _json(record.features)
    except TypeError as err:
        raise _fail(record, "features", f"cannot be stored as JSON ({err})") from err
    k = len(arms)
    return (
        texts[0],
        _timestamp(record),
        *texts[1:],
        features,
        _number(record, "value", record.value),
        _json(arms),
        *(_json(_numbers(record, name, k)) for name in ("tau", "low", "high")),
        _number(record, "mu0", record.mu0),
        record.action,
        _number(record, "expected_value", record.expected_value),
        int(record.explored),
        int(record.holdout),
        int(record.do_not_contact),
        propensity,
        _json(probs),
        record.mode,
    )


def engine_row(record: DecisionRecord) -> tuple[Any, ...]:
    """:func:`to_row` for a record the engine has just built (the one-customer path).

    The engine builds every field with its type (Python floats and booleans, the
    campaign's labels, :func:`utc_now`), so only what a model could get wrong is checked
    here, at a fraction of the cost: every number a finite float, the probabilities in
    [0, 1] summing to 1 and the propensity ``action_probs[action] > 0``. Anything else,
    or any doubt, goes through :func:`to_row`, which gives the same row or names the
    field. A test checks both give the same rows.
    """
    probs = record.action_probs
    tau, low, high = record.tau, record.low, record.high
    numbers = (record.value, record.mu0, record.expected_value, *tau, *low, *high)
    texts = (record.decision_id, record.campaign, record.customer_id, record.model_name,
             record.model_version, record.policy_hash)  # fmt: skip
    flags = (record.explored, record.holdout, record.do_not_contact)
    propensity = record.propensity
    p = list(probs.values())
    if (
        record.mode not in MODES
        or type(record.created_at) is not str
        or _UTC_MICROS.fullmatch(record.created_at) is None
        or not all(type(t) is str and t for t in texts)
        or not all(type(f) is bool for f in flags)
        or type(record.features) is not dict
        or not all(type(x) is float and math.isfinite(x) for x in numbers)
        or not all(type(x) is float and 0.0 <= x <= 1.0 for x in p)
        or abs(sum(p) - 1.0) > _PROB_SLACK
        or type(propensity) is not float
        or not 0.0 < propensity <= 1.0
        or abs(propensity - probs.get(record.action, -1.0)) > _PROB_SLACK
        or not len(tau) == len(low) == len(high) == len(record.arms)
        or list(probs) != [_NO_CONTACT, *record.arms]
    ):
        return to_row(record)
    try:
        features = _json(record.features)
    except TypeError:
        return to_row(record)
    return (
        record.decision_id,
        record.created_at,
        record.campaign,
        record.customer_id,
        record.model_name,
        record.model_version,
        record.policy_hash,
        features,
        record.value,
        _json(record.arms),
        _json(tau),
        _json(low),
        _json(high),
        record.mu0,
        record.action,
        record.expected_value,
        int(record.explored),
        int(record.holdout),
        int(record.do_not_contact),
        propensity,
        _json(probs),
        record.mode,
    )


def from_row(row: Sequence[Any]) -> DecisionRecord:
    """Rebuild a record from a row in the column order of :data:`COLUMNS`."""
    (d_id, created, campaign, customer, name, version, policy, features, value) = row[:9]
    arms, tau, low, high, mu0, action, ev, explored, holdout, dnc, prop, probs, mode = row[9:]
    return DecisionRecord(
        decision_id=d_id,
        created_at=created,
        campaign=campaign,
        customer_id=customer,
        model_name=name,
        model_version=version,
        policy_hash=policy,
        features=orjson.loads(features),
        value=value,
        arms=orjson.loads(arms),
        tau=orjson.loads(tau),
        low=orjson.loads(low),
        high=orjson.loads(high),
        mu0=mu0,
        action=action,
        expected_value=ev,
        explored=bool(explored),
        holdout=bool(holdout),
        do_not_contact=bool(dnc),
        propensity=prop,
        action_probs=orjson.loads(probs),
        mode=mode,
    )


COLUMNS = (
    "decision_id",
    "created_at",
    "campaign",
    "customer_id",
    "model_name",
    "model_version",
    "policy_hash",
    "features",
    "value",
    "arms",
    "tau",
    "low",
    "high",
    "mu0",
    "action",
    "expected_value",
    "explored",
    "holdout",
    "do_not_contact",
    "propensity",
    "action_probs",
    "mode",
)
"""Columns of the ``decisions`` table, in row order."""


def _json(value: Any) -> str:
    # Stored as text: each small bytes object orjson returns holds ~4 KB of memory,
    # which made a 100,000-customer batch peak at about 3 GB.
    return orjson.dumps(value, option=_JSON).decode()
