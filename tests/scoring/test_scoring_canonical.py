"""Column-wise feature JSON and decision ids equal the per-row reference byte for byte."""

from __future__ import annotations

import numpy as np
import orjson

from service.decisions import decision_id
from service.hashing import COMPILED_ROWS
from service.scoring.canonical import decision_ids, feature_json

_SORTED = orjson.OPT_SORT_KEYS


def _columns() -> dict[str, np.ndarray]:
    # Awkward values on purpose: commas, quotes, percent signs and non-ASCII text,
    # missing values, signed zero, extremes of float formatting.
    numbers = np.array([1.0, np.nan, -0.0, 1e300, 5e-324, 0.1 + 0.2, 3.0, -12.5])
    text = np.array(["a,b", None, 'q"uote', "100%", "théière", "", "a,b", "\\n"], dtype=object)
    return {"z_last": numbers, "plan, kind": text, "%s": numbers[::-1].copy(), "Ünï": text}


def _reference_rows(columns: dict[str, np.ndarray]) -> list[dict[str, object]]:
    n = len(next(iter(columns.values())))
    rows = []
    for i in range(n):
        row: dict[str, object] = {}
        for name, column in columns.items():
            value = column[i]
            if isinstance(value, float) and np.isnan(value):
                value = None
            row[name] = value.item() if isinstance(value, np.generic) else value
        rows.append(row)
    return rows


def test_feature_json_is_orjson_of_each_row() -> None:
    columns = _columns()
    expected = [orjson.dumps(r, option=_SORTED).decode() for r in _reference_rows(columns)]
    assert feature_json(columns, 8) == expected


def test_decision_ids_equal_the_scalar_function() -> None:
    columns = _columns()
    rows = _reference_rows(columns)
    ids = [f'C,{i}%"é' for i in range(8)]
    values = np.array([40.0, 1.5, 1e-9, 3.0, 7.25, 40.0, 0.1 + 0.2, 2.0**60])
    model = ("larkspur", "v0003")
    for context in ("score", "rank:0123abcd%"):
        fast = decision_ids(
            "camp%s", ids, "hash,1", model, feature_json(columns, 8), values, context
        )
        slow = [
            decision_id("camp%s", i, "hash,1", model, r, v, context=context)
            for i, r, v in zip(ids, rows, values.tolist(), strict=True)
        ]
        assert fast == slow
        # The same rows tiled past COMPILED_ROWS go through the compiled hash.
        reps = COMPILED_ROWS // 8 + 1
        tiled = {name: np.tile(column, reps) for name, column in columns.items()}
        many = decision_ids(
            "camp%s", ids * reps, "hash,1", model, feature_json(tiled, 8 * reps),
            np.tile(values, reps), context,
        )  # fmt: skip
        assert many == slow * reps
        ascii_ids = [f"C{i}" for i in range(8 * reps)]
        plain = {"n": np.arange(8.0 * reps)}
        many = decision_ids("c", ascii_ids, "h", model, feature_json(plain, 8 * reps),
                            np.ones(8 * reps), context)  # fmt: skip
        assert many == [
            decision_id("c", i, "h", model, {"n": float(k)}, 1.0, context=context)
            for k, i in enumerate(ascii_ids)
        ]


def test_no_features_and_no_rows() -> None:
    assert feature_json({}, 2) == ["{}", "{}"]
    assert feature_json({"x": np.empty(0)}, 0) == []
    empty = decision_ids("c", [], "h", ("m", "v1"), [], np.empty(0))
    assert empty == []
