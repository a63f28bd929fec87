"""Features for a segment tree and the readable rule of each of its leaves.

Numeric columns enter the tree as they are (missing values are routed by the tree);
text and categorical columns as one indicator per category. A leaf's path becomes a
rule such as ``tenure_months in [6, 24) and plan = family``: numeric thresholds are
moved to the next observed value, so ``x <= 5.5`` on whole numbers reads ``x < 6``.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import numpy as np
import pandas as pd

__all__ = ["TreeFeatures", "leaf_rules"]


@dataclass(frozen=True)
class TreeFeatures:
    """The design matrix of a segment tree and what each of its columns means."""

    matrix: np.ndarray
    source: list[str]  # the original column of each matrix column
    category: list[Any]  # the category of an indicator column, None for a numeric one
    values: dict[str, np.ndarray] = field(default_factory=dict)  # sorted observed values

    @classmethod
    def build(cls, X: pd.DataFrame) -> TreeFeatures:
        blocks: list[np.ndarray] = []
        source: list[str] = []
        category: list[Any] = []
        values: dict[str, np.ndarray] = {}
        for name in X.columns:
            column = X[name]
            numeric = pd.api.types.is_numeric_dtype(column) and not isinstance(
                column.dtype, pd.CategoricalDtype
            )
            if numeric or pd.api.types.is_bool_dtype(column):
                array = column.to_numpy(dtype=float, na_value=np.nan)
                blocks.append(array[:, None])
                source.append(str(name))
                category.append(None)
                values[str(name)] = np.unique(array[~np.isnan(array)])
                continue
            text = column.astype(object)
            levels = sorted({str(v) for v in text.dropna()})
            for level in levels:
                flags = np.array([pd.notna(v) and str(v) == level for v in text], dtype=float)
                blocks.append(flags[:, None])
                source.append(str(name))
                category.append(level)
        return cls(np.hstack(blocks), source, category, values)

    def numeric_cut(self, column: int, threshold: float) -> float:
        """The smallest observed value above ``threshold`` (left is ``x < cut``)."""
        observed = self.values[self.source[column]]
        above = observed[observed > threshold]
        return float(above[0]) if len(above) else float(threshold)


def _number(value: float) -> str:
    return f"{value:.4g}"


@dataclass
class _Path:
    low: dict[str, float] = field(default_factory=dict)
    high: dict[str, float] = field(default_factory=dict)
    missing: dict[str, bool] = field(default_factory=dict)  # feature -> missing included
    equals: dict[str, Any] = field(default_factory=dict)
    excluded: dict[str, list[Any]] = field(default_factory=dict)
    order: list[str] = field(default_factory=list)

    def note(self, name: str) -> None:
        if name not in self.order:
            self.order.append(name)

    def text(self) -> str:
        parts = []
        for name in self.order:
            if name in self.equals:
                parts.append(f"{name} = {self.equals[name]}")
            elif name in self.excluded:
                levels = ", ".join(str(v) for v in self.excluded[name])
                parts.append(f"{name} not in {{{levels}}}")
            else:
                parts.append(self._numeric(name))
        return " and ".join(parts) if parts else "everyone"

    def _numeric(self, name: str) -> str:
        low, high = self.low.get(name), self.high.get(name)
        if low is not None and high is not None:
            rule = f"{name} in [{_number(low)}, {_number(high)})"
        elif low is not None:
            rule = f"{name} >= {_number(low)}"
        else:
            rule = f"{name} < {_number(high if high is not None else np.inf)}"
        if self.missing.get(name):
            rule = f"({rule} or {name} missing)"
        return rule


def leaf_rules(tree: Any, features: TreeFeatures) -> dict[int, str]:
    """Map each leaf id of a fitted scikit-learn decision tree to its rule."""
    inner = tree.tree_
    go_left_missing = getattr(inner, "missing_go_to_left", np.zeros(inner.node_count))
    rules: dict[int, str] = {}

    def walk(node: int, path: _Path) -> None:
        left, right = inner.children_left[node], inner.children_right[node]
        if left == right:  # a leaf
            rules[node] = path.text()
            return
        column, threshold = int(inner.feature[node]), float(inner.threshold[node])
        name, level = features.source[column], features.category[column]
        for child, is_left in ((left, True), (right, False)):
            branch = _copy(path)
            branch.note(name)
            if level is not None:  # indicator: left is "not this category"
                if is_left:
                    branch.excluded.setdefault(name, []).append(level)
                else:
                    branch.equals[name] = level
                    branch.excluded.pop(name, None)
            else:
                cut = features.numeric_cut(column, threshold)
                missing_here = bool(go_left_missing[node]) == is_left
                if is_left:
                    branch.high[name] = min(branch.high.get(name, np.inf), cut)
                else:
                    branch.low[name] = max(branch.low.get(name, -np.inf), cut)
                # Missing values follow one side only if the feature had any.
                had_missing = branch.missing.get(name, True)
                branch.missing[name] = had_missing and missing_here and _has_nan(features, column)
            walk(child, branch)

    walk(0, _Path())
    return rules


def _has_nan(features: TreeFeatures, column: int) -> bool:
    return bool(np.isnan(features.matrix[:, column]).any())


def _copy(path: _Path) -> _Path:
    return _Path(
        dict(path.low),
        dict(path.high),
        dict(path.missing),
        dict(path.equals),
        {k: list(v) for k, v in path.excluded.items()},
        list(path.order),
    )
