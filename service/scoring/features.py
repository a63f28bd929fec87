"""Check request features against the feature schema a model was trained on.

Unknown names, wrong types, NaN and infinities are refused per field (with the row, the
feature and the fix). Missing values are allowed, because every upshot learner handles
them, and are reported as ``missing:<feature>``; numbers outside the training range and
categories never seen in training are scored but flagged (``out_of_range:<feature>``,
``unknown_category:<feature>``).
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np
import numpy.typing as npt
import pandas as pd

from service.errors import DataError
from service.uplift import FeatureSpec

__all__ = ["FeatureSchema", "FeatureTable", "InvalidFeatures"]

_MAX_LISTED = 20
_NUMBER_TYPES = frozenset({int, float, type(None)})


class InvalidFeatures(DataError):
    """Request features that cannot be scored; ``details`` lists every problem found."""

    def __init__(self, problems: list[dict[str, Any]]) -> None:
        first = problems[0]
        where = f"customer {first['row']}, " if first.get("row") is not None else ""
        more = f" ({len(problems) - 1} more problem(s) in details)" if len(problems) > 1 else ""
        super().__init__(f"{where}feature {first['feature']!r}: {first['problem']}{more}.")
        self.details = {"problems": problems[:_MAX_LISTED], "count": len(problems)}


@dataclass(frozen=True)
class FeatureTable:
    """Validated features of a group of customers, column by column.

    ``columns`` holds float arrays (NaN = missing) for numeric features and object
    arrays of text (None = missing) for categorical ones; a category never seen in
    training is kept as sent (the model reads it as missing). ``reasons`` holds the
    input flags of each row.
    """

    columns: dict[str, npt.NDArray[Any]]
    reasons: list[list[str]]

    def __len__(self) -> int:
        return len(self.reasons)

    def slice(self, start: int, stop: int) -> FeatureTable:
        """Rows ``start:stop`` (views of the same arrays, no copy)."""
        columns = {name: column[start:stop] for name, column in self.columns.items()}
        return FeatureTable(columns, self.reasons[start:stop])

    def frame(self) -> pd.DataFrame:
        """The table as a DataFrame in the model's column order."""
        return pd.DataFrame(self.columns, copy=False)

    def row(self, i: int) -> dict[str, Any]:
        """Row ``i`` as plain Python values (None for missing)."""
        out: dict[str, Any] = {}
        for name, column in self.columns.items():
            value = column[i]
            if isinstance(value, float) and math.isnan(value):
                value = None
            out[name] = value.item() if isinstance(value, np.generic) else value
        return out


class FeatureSchema:
    """The features a model expects, with the ranges and categories seen in training."""

    def __init__(self, specs: Sequence[FeatureSpec]) -> None:
        self.specs = list(specs)
        self.names = [s.name for s in self.specs]
        self._by_name = {s.name: s for s in self.specs}
        self._categories = {s.name: frozenset(s.categories) for s in self.specs}

    @classmethod
    def from_manifest(cls, features: Sequence[Mapping[str, Any]]) -> FeatureSchema:
        """Build from the ``features`` list of a bundle manifest."""
        return cls(
            [
                FeatureSpec(
                    name=str(f["name"]),
                    kind=str(f["kind"]),
                    categories=tuple(f.get("categories") or ()),
                    minimum=f.get("minimum"),
                    maximum=f.get("maximum"),
                    missing_share=float(f.get("missing_share") or 0.0),
                )
                for f in features
            ]
        )

    # -- one customer --------------------------------------------------------------------

    def check_row(self, features: Mapping[str, Any]) -> tuple[dict[str, Any], list[str]]:
        """Validate one customer's features; return clean values and the input flags."""
        self._refuse_unknown(features.keys(), row=None)
        clean: dict[str, Any] = {}
        reasons: list[str] = []
        problems: list[dict[str, Any]] = []
        for spec in self.specs:
            value = features.get(spec.name)
            problem = _problem(spec, value)
            if problem is not None:
                problems.append({"row": None, "feature": spec.name, "problem": problem})
                continue
            if value is None:
                reasons.append(f"missing:{spec.name}")
            elif spec.kind == "numeric":
                value = float(value)
                if _outside(spec, value):
                    reasons.append(f"out_of_range:{spec.name}")
            else:
                value = _as_category(value)
                if value not in self._categories[spec.name]:
                    reasons.append(f"unknown_category:{spec.name}")
            clean[spec.name] = value
        if problems:
            raise InvalidFeatures(problems)
        reasons.sort()
        return clean, reasons

    def table_from_rows(self, rows: Sequence[Mapping[str, Any]]) -> FeatureTable:
        """Validate row-wise features (one mapping per customer)."""
        for i, features in enumerate(rows):
            self._refuse_unknown(features.keys(), row=i)
        columns = {name: [f.get(name) for f in rows] for name in self.names}
        return self.table_from_columns(columns, len(rows), rows_given=True)

    # -- many customers ------------------------------------------------------------------

    def table_from_columns(
        self, columns: Mapping[str, Sequence[Any]], n: int, *, rows_given: bool = False
    ) -> FeatureTable:
        """Validate column-wise features; every column must have ``n`` entries."""
        if not rows_given:
            self._refuse_unknown(columns.keys(), row=None)
            short = [name for name, col in columns.items() if len(col) != n]
            if short:
                raise InvalidFeatures(
                    [
                        {
                            "row": None,
                            "feature": name,
                            "problem": f"has {len(columns[name])} values but there are {n} "
                            "ids; send one value per customer (null if missing)",
                        }
                        for name in short
                    ]
                )
        out: dict[str, npt.NDArray[Any]] = {}
        flags: dict[str, npt.NDArray[np.bool_]] = {}
        problems: list[dict[str, Any]] = []
        for spec in self.specs:
            values = columns.get(spec.name)
            if values is None:
                values = [None] * n
            column: npt.NDArray[Any]
            if spec.kind == "numeric":
                column, column_problems = self._numeric_column(spec, values)
            else:
                column, column_problems = self._categorical_column(spec, values)
            problems += column_problems
            out[spec.name] = column
            if not column_problems:
                self._flag(spec, column, flags)
        if problems:
            problems.sort(key=lambda p: (p["row"], self.names.index(p["feature"])))
            raise InvalidFeatures(problems)
        return FeatureTable(out, _row_reasons(flags, n))

    def _numeric_column(
        self, spec: FeatureSpec, values: Sequence[Any]
    ) -> tuple[npt.NDArray[np.float64], list[dict[str, Any]]]:
        if set(map(type, values)) <= _NUMBER_TYPES:
            column = np.array(values, dtype=float)
            if np.isfinite(column).sum() + _count_none(values) == len(values):
                return column, []
        problems = []
        for i, value in enumerate(values):
            problem = _problem(spec, value)
            if problem is not None:
                problems.append({"row": i, "feature": spec.name, "problem": problem})
        return np.empty(0), problems

    def _categorical_column(
        self, spec: FeatureSpec, values: Sequence[Any]
    ) -> tuple[npt.NDArray[np.object_], list[dict[str, Any]]]:
        problems = []
        column = np.empty(len(values), dtype=object)
        for i, value in enumerate(values):
            if type(value) is str or value is None:
                column[i] = value
                continue
            problem = _problem(spec, value)
            if problem is not None:
                problems.append({"row": i, "feature": spec.name, "problem": problem})
            else:
                column[i] = _as_category(value)
        return column, problems

    def _flag(
        self,
        spec: FeatureSpec,
        column: npt.NDArray[Any],
        flags: dict[str, npt.NDArray[np.bool_]],
    ) -> None:
        if spec.kind == "numeric":
            missing = np.isnan(column)
            outside = np.zeros(len(column), dtype=bool)
            if spec.minimum is not None:
                outside |= column < spec.minimum
            if spec.maximum is not None:
                outside |= column > spec.maximum
            flags[f"out_of_range:{spec.name}"] = outside
        else:
            missing = np.array([v is None for v in column], dtype=bool)
            known = self._categories[spec.name]
            unknown = np.fromiter(
                (v is not None and v not in known for v in column), dtype=bool, count=len(column)
            )
            flags[f"unknown_category:{spec.name}"] = unknown
        flags[f"missing:{spec.name}"] = missing

    def _refuse_unknown(self, names: Any, row: int | None) -> None:
        unknown = [name for name in names if name not in self._by_name]
        if unknown:
            raise InvalidFeatures(
                [
                    {
                        "row": row,
                        "feature": name,
                        "problem": f"is not a feature of this model; its features are "
                        f"{self.names}. Remove it or fix the spelling",
                    }
                    for name in unknown
                ]
            )


def _problem(spec: FeatureSpec, value: Any) -> str | None:
    """Why ``value`` cannot be used for ``spec``, or None if it can."""
    if value is None:
        return None
    kind = type(value)
    if spec.kind == "numeric":
        if kind is bool or kind not in (int, float):
            return (
                f"must be a number, got {value!r} ({_json_type(value)}); send a number, "
                "or null if missing"
            )
        if kind is float and not math.isfinite(value):
            return f"must be a finite number, got {value!r}; send null if missing"
        return None
    if kind in (str, bool, int):
        return None
    return f"must be text (a category), got {value!r} ({_json_type(value)}); send null if missing"


def _json_type(value: Any) -> str:
    if isinstance(value, bool):
        return "boolean"
    if isinstance(value, int | float):
        return "number"
    if isinstance(value, str):
        return "text"
    return type(value).__name__


def _as_category(value: Any) -> str:
    # Training reads categories as text: booleans become "True"/"False", as pandas does.
    return value if type(value) is str else str(value)


def _outside(spec: FeatureSpec, value: float) -> bool:
    return (spec.minimum is not None and value < spec.minimum) or (
        spec.maximum is not None and value > spec.maximum
    )


def _count_none(values: Sequence[Any]) -> int:
    return sum(1 for v in values if v is None) if None in values else 0


def _row_reasons(flags: dict[str, npt.NDArray[np.bool_]], n: int) -> list[list[str]]:
    reasons: list[list[str]] = [[] for _ in range(n)]
    for reason, mask in flags.items():
        for i in np.flatnonzero(mask):
            reasons[i].append(reason)
    for row in reasons:
        if len(row) > 1:
            row.sort()
    return reasons
