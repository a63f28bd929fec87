"""What a pilot campaign scores with when there is no model: open features, no estimates.

A pilot (a campaign without ``model``) has no trained feature schema, so it accepts any
feature given as a finite number, text, a boolean or null, and logs it as sent: the log
becomes the first model's training table. Its "model" returns zero placeholders (the
policy of a pilot does not look at estimates; see :mod:`service.policy.pilot`).
"""

from __future__ import annotations

import math
import re
from collections.abc import Mapping, Sequence
from typing import Any

import numpy as np

from service.scoring.estimates import Estimates
from service.scoring.features import FeatureSchema, FeatureTable, InvalidFeatures

__all__ = ["OpenSchema", "PilotModel"]

_NAME = re.compile(r"^[A-Za-z_][A-Za-z0-9_.-]{0,127}$")
_BAD_NAME = "is not a usable feature name; use letters, digits, '_', '.' or '-'"


class PilotModel:
    """The servable stand-in of a pilot: no model, zero estimates for every arm."""

    kind = "pilot"
    form = "pilot"  # no model form: every estimate is a zero placeholder

    def __init__(self, n_arms: int) -> None:
        self.n_arms = n_arms

    def estimate(
        self, table: FeatureTable, confidence: float, *, threads: int | None = None
    ) -> Estimates:
        zeros = np.zeros((len(table), self.n_arms))
        return Estimates(zeros, np.zeros(len(table)), zeros, zeros)

    def estimate_row(self, row: dict[str, Any], confidence: float) -> Estimates:
        zeros = np.zeros((1, self.n_arms))
        return Estimates(zeros, np.zeros(1), zeros, zeros)


def _problem(value: Any) -> str | None:
    if value is None or type(value) in (str, bool, int):
        return None
    if type(value) is float:
        return None if math.isfinite(value) else f"must be finite, got {value!r}; send null"
    return f"must be a number, text, true/false or null, got {value!r}"


class OpenSchema(FeatureSchema):
    """Any feature name (letters, digits, ``_.-``) with a scalar value; nothing else."""

    def __init__(self) -> None:
        super().__init__([])

    def _check_names(self, names: Any, row: int | None) -> None:
        bad = [name for name in names if not (isinstance(name, str) and _NAME.match(name))]
        if bad:
            raise InvalidFeatures(
                [{"row": row, "feature": str(name), "problem": _BAD_NAME} for name in bad]
            )

    def check_row(self, features: Mapping[str, Any]) -> tuple[dict[str, Any], list[str]]:
        self._check_names(features.keys(), None)
        problems = [
            {"row": None, "feature": name, "problem": problem}
            for name, value in features.items()
            if (problem := _problem(value)) is not None
        ]
        if problems:
            raise InvalidFeatures(problems)
        return {name: features[name] for name in sorted(features)}, []

    def table_from_rows(self, rows: Sequence[Mapping[str, Any]]) -> FeatureTable:
        names = sorted({name for row in rows for name in row})
        for i, row in enumerate(rows):
            self._check_names(row.keys(), i)
        columns = {name: [row.get(name) for row in rows] for name in names}
        return self.table_from_columns(columns, len(rows))

    def table_from_columns(
        self, columns: Mapping[str, Sequence[Any]], n: int, *, rows_given: bool = False
    ) -> FeatureTable:
        self._check_names(columns.keys(), None)
        problems: list[dict[str, Any]] = []
        out: dict[str, Any] = {}
        for name in sorted(columns):
            values = list(columns[name])
            if len(values) != n:
                short = f"has {len(values)} values but there are {n} ids; send one each"
                problems.append({"row": None, "feature": name, "problem": short})
                continue
            for i, value in enumerate(values):
                if (problem := _problem(value)) is not None:
                    problems.append({"row": i, "feature": name, "problem": problem})
            kinds = {type(v) for v in values} - {type(None)}
            if kinds <= {int, float}:
                out[name] = np.array([np.nan if v is None else v for v in values], dtype=float)
            else:
                out[name] = np.array(values, dtype=object)
        if problems:
            raise InvalidFeatures(problems)
        return FeatureTable(out, [[] for _ in range(n)])
