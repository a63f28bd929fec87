"""Canonical feature JSON and decision ids for a whole chunk, column by column.

:func:`~service.decisions.decision_id` hashes the canonical JSON (orjson, sorted keys,
no spaces) of ``[campaign, customer id, policy hash, model, features, value]`` (plus the
context of a ranked list). Building one dict and one payload list per customer costs
more than the rest of the decision, so these functions write the same bytes from
columns: each feature column is serialised once by orjson and cut into per-row
fragments, and a row is one ``%`` format of its fragments. The text is byte for byte
what orjson writes for the row's dict (tests compare it with ``decision_id`` row by row).
"""

from __future__ import annotations

import hashlib
from collections.abc import Sequence
from typing import Any

import numpy as np
import numpy.typing as npt
import orjson

from service.hashing import COMPILED_ROWS, blake2b_texts

__all__ = ["decision_ids", "feature_json"]


def feature_json(columns: dict[str, npt.NDArray[Any]], n: int) -> list[str]:
    """Each row's features as canonical JSON text (sorted keys; null when missing).

    ``columns`` are a :class:`~service.scoring.FeatureTable`'s: float arrays (NaN =
    missing) or object arrays of text (None = missing).
    """
    names = sorted(columns)
    if not names:
        return ["{}"] * n
    fragments = [_fragments(columns[name]) for name in names]
    keys = [orjson.dumps(name).decode().replace("%", "%%") for name in names]
    template = "{" + ",".join(f"{key}:%s" for key in keys) + "}"
    return [template % row for row in zip(*fragments, strict=True)]


def decision_ids(
    campaign: str,
    customer_ids: Sequence[str],
    policy_hash: str,
    model: tuple[str, str],
    features: Sequence[str],
    values: npt.NDArray[np.float64],
    context: str = "score",
) -> list[str]:
    """:func:`~service.decisions.decision_id` of every row, from its feature JSON text."""
    head = "[" + orjson.dumps(campaign).decode().replace("%", "%%") + ",%s,"
    middle = orjson.dumps([policy_hash, "/".join(model)]).decode()[1:-1].replace("%", "%%")
    tail = "" if context == "score" else "," + orjson.dumps(context).decode().replace("%", "%%")
    template = head + middle + ",%s,%s" + tail + "]"
    ids = [orjson.dumps(str(i)).decode() for i in customer_ids]
    rows = zip(ids, features, _number_fragments(values), strict=True)
    if len(ids) < COMPILED_ROWS:
        blake2b = hashlib.blake2b
        return [blake2b((template % row).encode(), digest_size=16).hexdigest() for row in rows]
    text = blake2b_texts([template % row for row in rows], 16).tobytes().hex()
    return [text[k : k + 32] for k in range(0, len(text), 32)]


def _fragments(column: npt.NDArray[Any]) -> list[str]:
    if column.dtype == object:
        text = {v: orjson.dumps(v).decode() for v in set(column.tolist())}
        return [text[v] for v in column.tolist()]
    return _number_fragments(column)


def _number_fragments(column: npt.NDArray[Any]) -> list[str]:
    # orjson writes NaN as null; numbers and null hold no comma, so the split is exact.
    if not len(column):
        return []
    return orjson.dumps(np.asarray(column, dtype=float).tolist())[1:-1].decode().split(",")
