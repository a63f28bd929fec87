"""Decisions in column form: what the batch path builds and a decision store inserts.

A batch of one campaign under one model and one policy shares most fields; the rest are
arrays, one entry per decision. :meth:`DecisionColumns.check` validates the whole batch
with array operations (the same rules :func:`~service.decisions.record.to_row` applies
to one record), and :meth:`DecisionColumns.rows` yields database rows in the order of
:data:`~service.decisions.record.COLUMNS`, so a store inserts them without ever building
a :class:`~service.decisions.record.DecisionRecord` per decision.
"""

from __future__ import annotations

import functools
import itertools
from collections.abc import Iterator, Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np
import numpy.typing as npt
import orjson

from service.decisions.record import (
    _NO_CONTACT,
    _PROB_SLACK,
    MODES,
    DecisionRecord,
    _json,
    _timestamp,
    to_row,
)
from service.errors import DataError

__all__ = ["DecisionColumns"]

FloatArray = npt.NDArray[np.float64]
BoolArray = npt.NDArray[np.bool_]
IntArray = npt.NDArray[np.intp]


@dataclass(frozen=True, eq=False)
class DecisionColumns:
    """Decisions of one campaign, model and policy, as columns.

    Batch-wide: ``campaign``, ``model_name``, ``model_version``, ``policy_hash``, ``arms``
    (the contact arms; actions are indices into ``("none", *arms)``), ``mode`` and
    ``created_at``. Per decision (length n): ``decision_id``, ``customer_id``,
    ``features`` (canonical JSON text, as :func:`~service.decisions.decision_id` hashes
    it), ``value``, ``mu0``, ``action``, ``expected_value``, the three flags; per
    decision and arm (n, K): ``tau``, ``low``, ``high``; per decision and action
    (n, 1 + K): ``action_probs``. The propensity is ``action_probs[i, action[i]]``.
    """

    campaign: str
    model_name: str
    model_version: str
    policy_hash: str
    arms: tuple[str, ...]
    mode: str
    created_at: str
    decision_id: Sequence[str]
    customer_id: Sequence[str]
    features: Sequence[str]
    value: FloatArray
    tau: FloatArray
    low: FloatArray
    high: FloatArray
    mu0: FloatArray
    action: IntArray
    expected_value: FloatArray
    explored: BoolArray
    holdout: BoolArray
    do_not_contact: BoolArray
    action_probs: FloatArray

    def __len__(self) -> int:
        return len(self.decision_id)

    @property
    def labels(self) -> tuple[str, ...]:
        """Action labels: ``"none"`` then the arms."""
        return (_NO_CONTACT, *self.arms)

    @property
    def propensity(self) -> FloatArray:
        """Probability of the action taken, per decision."""
        return np.asarray(self.action_probs[np.arange(len(self)), self.action], dtype=float)

    def check(self) -> None:
        """Refuse the whole batch, naming the first bad decision and field, if any is invalid."""
        n, k = len(self), len(self.arms)
        for name in ("campaign", "model_name", "model_version", "policy_hash"):
            if not isinstance(getattr(self, name), str) or not getattr(self, name):
                raise self._fail(0, name, "must be a non-empty string")
        labels = self.labels
        if not k or len(set(labels)) != len(labels) or not all(isinstance(a, str) for a in labels):
            raise self._fail(0, "arms", f"= {list(self.arms)!r} must be distinct arm labels")
        if self.mode not in MODES:
            raise self._fail(0, "mode", f"= {self.mode!r} must be one of {list(MODES)}")
        _timestamp_of(self)
        for name in ("customer_id", "features"):
            if len(getattr(self, name)) != n:
                raise self._fail(0, name, f"has {len(getattr(self, name))} entries for {n}")
        for i, (d_id, c_id) in enumerate(zip(self.decision_id, self.customer_id, strict=True)):
            if not isinstance(d_id, str) or not d_id:
                raise self._fail(i, "decision_id", "must be a non-empty string")
            if not isinstance(c_id, str) or not c_id:
                raise self._fail(i, "customer_id", "must be a non-empty string")
        shapes = {
            "value": (n,), "mu0": (n,), "expected_value": (n,), "tau": (n, k), "low": (n, k),
            "high": (n, k), "action_probs": (n, k + 1),
        }  # fmt: skip
        for name, shape in shapes.items():
            array = np.asarray(getattr(self, name), dtype=float)
            if array.shape != shape:
                raise self._fail(0, name, f"has shape {array.shape}, expected {shape}")
            bad = ~np.isfinite(array).reshape(n, -1).all(axis=1)
            if bad.any():
                raise self._fail(int(np.argmax(bad)), name, "must hold finite numbers")
        action = np.asarray(self.action)
        if action.shape != (n,) or ((action < 0) | (action > k)).any():
            out = (action.reshape(-1) < 0) | (action.reshape(-1) > k)
            raise self._fail(_first(out), "action", f"must index {labels}")
        probs = np.asarray(self.action_probs, dtype=float)
        bad = ((probs < 0) | (probs > 1)).any(axis=1) | (
            np.abs(probs.sum(axis=1) - 1) > _PROB_SLACK
        )
        if bad.any():
            raise self._fail(
                _first(bad), "action_probs", "must hold probabilities in [0, 1] that sum to 1"
            )
        bad = ~(self.propensity > 0)
        if bad.any():
            raise self._fail(_first(bad), "propensity", "must equal action_probs[action] > 0")
        for name in ("explored", "holdout", "do_not_contact"):
            if np.asarray(getattr(self, name)).shape != (n,):
                raise self._fail(0, name, f"must hold {n} flags")

    @functools.cached_property
    def checked_rows(self) -> list[tuple[Any, ...]]:
        """:meth:`check`, then :meth:`rows` as a list, built once: the batch path builds
        them on its deciding thread, so the log's writer only inserts."""
        self.check()
        return list(self.rows())

    def rows(self) -> Iterator[tuple[Any, ...]]:
        """Database rows in :data:`~service.decisions.record.COLUMNS` order (unchecked).

        Built column by column (batch-wide fields repeated, JSON text cut from one orjson
        call per column), so no Python code runs per decision.
        """
        n = len(self)
        same = itertools.repeat
        labels = np.array(self.labels, dtype=object)
        return zip(
            self.decision_id, same(_timestamp_of(self), n), same(self.campaign, n),
            self.customer_id, same(self.model_name, n), same(self.model_version, n),
            same(self.policy_hash, n), self.features, self.value.tolist(),
            same(_json(list(self.arms)), n), _json_rows(self.tau), _json_rows(self.low),
            _json_rows(self.high), self.mu0.tolist(), labels[self.action].tolist(),
            self.expected_value.tolist(), _flags(self.explored), _flags(self.holdout),
            _flags(self.do_not_contact), self.propensity.tolist(),
            _probability_rows(self.labels, self.action_probs), same(self.mode, n),
            strict=True,
        )  # fmt: skip

    def records(self) -> list[DecisionRecord]:
        """The same decisions as records (for tests and single lookups; slow for big batches)."""
        labels = self.labels
        return [
            DecisionRecord(
                decision_id=d_id,
                created_at=self.created_at,
                campaign=self.campaign,
                customer_id=c_id,
                model_name=self.model_name,
                model_version=self.model_version,
                policy_hash=self.policy_hash,
                features=orjson.loads(feats),
                value=float(value),
                arms=list(self.arms),
                tau=tau,
                low=low,
                high=high,
                mu0=float(mu0),
                action=labels[a],
                expected_value=float(ev),
                explored=bool(x),
                holdout=bool(h),
                do_not_contact=bool(dnc),
                propensity=float(pr[a]),
                action_probs=dict(zip(labels, pr, strict=True)),
                mode=self.mode,
            )  # fmt: skip
            for d_id, c_id, feats, value, tau, low, high, mu0, a, ev, x, h, dnc, pr in zip(
                self.decision_id,
                self.customer_id,
                self.features,
                self.value.tolist(),
                self.tau.tolist(),
                self.low.tolist(),
                self.high.tolist(),
                self.mu0.tolist(),
                self.action.tolist(),
                self.expected_value.tolist(),
                self.explored.tolist(),
                self.holdout.tolist(),
                self.do_not_contact.tolist(),
                self.action_probs.tolist(),
                strict=True,
            )  # fmt: skip
        ]

    @classmethod
    def from_records(cls, records: Sequence[DecisionRecord]) -> DecisionColumns:
        """Columns of records that share campaign, model, policy, arms, mode and time."""
        if not records:
            raise DataError("No records to put in columns; pass at least one.")
        first = records[0]
        key = _batch_key(first)
        for record in records:
            if _batch_key(record) != key:
                raise DataError(
                    f"Decision {record.decision_id!r} differs from {first.decision_id!r} in "
                    "campaign, model, policy, arms, mode or time; put them in separate batches."
                )
            to_row(record)  # the per-record checks, naming the field
        labels = (_NO_CONTACT, *first.arms)
        index = {label: j for j, label in enumerate(labels)}
        return cls(
            campaign=first.campaign, model_name=first.model_name,
            model_version=first.model_version, policy_hash=first.policy_hash,
            arms=tuple(first.arms), mode=first.mode, created_at=first.created_at,
            decision_id=[r.decision_id for r in records],
            customer_id=[r.customer_id for r in records],
            features=[_json(r.features) for r in records],
            value=np.array([r.value for r in records], dtype=float),
            tau=np.array([r.tau for r in records], dtype=float),
            low=np.array([r.low for r in records], dtype=float),
            high=np.array([r.high for r in records], dtype=float),
            mu0=np.array([r.mu0 for r in records], dtype=float),
            action=np.array([index[r.action] for r in records], dtype=np.intp),
            expected_value=np.array([r.expected_value for r in records], dtype=float),
            explored=np.array([r.explored for r in records], dtype=bool),
            holdout=np.array([r.holdout for r in records], dtype=bool),
            do_not_contact=np.array([r.do_not_contact for r in records], dtype=bool),
            action_probs=np.array(
                [[r.action_probs[label] for label in labels] for r in records], dtype=float
            ),
        )  # fmt: skip

    def _fail(self, i: int, field: str, problem: str) -> DataError:
        d_id = self.decision_id[i] if 0 <= i < len(self.decision_id) else None
        return DataError(
            f"Decision {d_id!r}: field {field!r} {problem}; nothing of this batch was logged."
        )


def _batch_key(record: DecisionRecord) -> tuple[Any, ...]:
    return (
        record.campaign, record.model_name, record.model_version, record.policy_hash,
        tuple(record.arms), record.mode, record.created_at,
    )  # fmt: skip


def _timestamp_of(columns: DecisionColumns) -> str:
    # Reuse the record rule (ISO 8601 with an offset, stored in UTC).
    probe = DecisionRecord(
        decision_id=columns.decision_id[0] if len(columns) else "-", created_at=columns.created_at,
        campaign="", customer_id="", model_name="", model_version="", policy_hash="",
        features={}, value=0.0, arms=[], tau=[], low=[], high=[], mu0=0.0, action="",
        expected_value=0.0, explored=False, holdout=False, do_not_contact=False, propensity=0.0,
        action_probs={}, mode="",
    )  # fmt: skip
    return _timestamp(probe)


def _first(mask: npt.NDArray[np.bool_]) -> int:
    return int(np.argmax(mask)) if mask.any() else 0


def _json_rows(values: FloatArray) -> list[str]:
    """``orjson.dumps(row)`` of every row of a 2-D array (what ``_json`` writes)."""
    return _templated("[" + ",".join(["%s"] * values.shape[1]) + "]", values)


def _probability_rows(labels: tuple[str, ...], probs: FloatArray) -> list[str]:
    """``_json(dict(zip(labels, row)))`` of every row: keys sorted, as orjson sorts them."""
    order = sorted(range(len(labels)), key=labels.__getitem__)
    keys = [orjson.dumps(labels[j]).decode().replace("%", "%%") for j in order]
    template = "{" + ",".join(f"{key}:%s" for key in keys) + "}"
    return _templated(template, np.asarray(probs)[:, order])


def _templated(template: str, values: FloatArray) -> list[str]:
    # orjson writes each float as it would inside any list (NaN as null); numbers hold no
    # comma, so one call for the whole array cut at the commas gives every number's text.
    n, k = values.shape
    if not n:
        return []
    if not k:
        return [template] * n
    text = orjson.dumps(np.asarray(values, dtype=float).ravel().tolist())[1:-1].decode()
    numbers = text.split(",")
    return [template % row for row in zip(*(numbers[j::k] for j in range(k)), strict=True)]


def _flags(values: BoolArray) -> list[int]:
    flags: list[int] = np.asarray(values, dtype=np.int64).tolist()
    return flags
