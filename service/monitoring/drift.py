"""Drift of features and scores against a model bundle's training reference, by PSI.

The bundle manifest's ``reference`` holds, per feature and per arm's score, the training
distribution in bins (see :mod:`service.registry.reference`). Recent values are binned
the same way, missing values in a bin of their own and unseen categories pooled, and
compared with :func:`~service.monitoring.psi.psi`.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, field
from typing import Any

import numpy as np
import pandas as pd

from service.errors import DataError
from service.monitoring.psi import PSI_ACT, PSI_WATCH, psi, psi_level
from service.registry import bin_shares

__all__ = ["DriftItem", "DriftReport", "binned", "compare_to_reference"]


@dataclass(frozen=True)
class DriftItem:
    """PSI of one feature (``kind="feature"``) or one arm's score (``kind="score"``)."""

    kind: str
    name: str
    psi: float
    level: str
    bins: list[str]
    expected: list[float]
    actual: list[float]

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready fields."""
        return {
            "kind": self.kind,
            "name": self.name,
            "psi": self.psi,
            "level": self.level,
            "bins": self.bins,
            "expected": self.expected,
            "actual": self.actual,
        }


@dataclass(frozen=True)
class DriftReport:
    """Every feature's and score's PSI over ``n`` recent rows, worst first."""

    n: int
    items: list[DriftItem]
    thresholds: dict[str, float] = field(
        default_factory=lambda: {"watch": PSI_WATCH, "act": PSI_ACT}
    )

    @property
    def level(self) -> str:
        """The worst level of any item ("stable" when there is none)."""
        order = ("stable", "watch", "act")
        return max((i.level for i in self.items), key=order.index, default="stable")

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready fields, with the note that the thresholds have no published source."""
        return {
            "n": self.n,
            "level": self.level,
            "thresholds": dict(self.thresholds),
            "thresholds_note": "PSI 0.1 (watch) and 0.25 (act) are common practice, no source.",
            "items": [i.to_dict() for i in self.items],
        }


def binned(
    reference: Mapping[str, Any], values: Any
) -> tuple[list[str], list[float], list[float]]:
    """Bin labels, reference shares and shares of ``values``, missing values as a bin.

    Shares of the non-missing bins are scaled by the non-missing share, so both vectors
    sum to 1 over all bins.
    """
    _check_reference(reference)
    fresh = bin_shares(dict(reference), values)
    if reference["kind"] == "numeric":
        edges = [float(e) for e in reference["edges"]]
        bounds = ["-inf", *(f"{e:g}" for e in edges), "inf"]
        labels = [f"({bounds[i]}, {bounds[i + 1]}]" for i in range(len(edges) + 1)]
        expected = list(reference["shares"])
        actual = list(fresh["shares"])
    else:
        labels = list(reference["shares"])
        if "__other__" in fresh["shares"]:
            labels.append("__other__")
        expected = [float(reference["shares"].get(k, 0.0)) for k in labels]
        actual = [float(fresh["shares"].get(k, 0.0)) for k in labels]
    e_missing, a_missing = float(reference["missing"]), float(fresh["missing"])
    expected = [s * (1.0 - e_missing) for s in expected] + [e_missing]
    actual = [s * (1.0 - a_missing) for s in actual] + [a_missing]
    return [*labels, "missing"], expected, actual


def compare_to_reference(
    reference: Mapping[str, Any],
    features: pd.DataFrame,
    scores: Mapping[str, Any] | None = None,
) -> DriftReport:
    """PSI of each referenced feature in ``features`` and of each arm's score in ``scores``.

    Parameters
    ----------
    reference : the manifest's ``reference`` (``{"features": {...}, "score": {...}}``).
    features : recent feature values as scored, one column per feature (a feature the
        frame lacks counts as entirely missing).
    scores : arm -> recent predicted uplift of that arm, for the arms to check.

    References
    ----------
    Yurdakul, B. (2018). Statistical properties of population stability index. Doctoral
    dissertation, Western Michigan University.
    """
    if not isinstance(reference, Mapping) or "features" not in reference:
        raise DataError(
            "The bundle manifest has no usable 'reference' (features and score "
            "distributions); retrain the model with this upshot to record one."
        )
    n = len(features)
    if n == 0:
        raise DataError("No recent rows to compare; widen the window (--since / --last).")
    items = []
    for name, ref in reference["features"].items():
        values = features[name] if name in features else pd.Series([None] * n, dtype=object)
        items.append(_item("feature", name, ref, values))
    for arm, values in (scores or {}).items():
        ref = reference.get("score", {}).get(str(arm))
        if ref is not None:
            items.append(_item("score", str(arm), ref, np.asarray(values, dtype=float)))
    items.sort(key=lambda i: -i.psi)
    return DriftReport(n=n, items=items)


def _item(kind: str, name: str, reference: Mapping[str, Any], values: Any) -> DriftItem:
    labels, expected, actual = binned(reference, values)
    value = psi(expected, actual)
    return DriftItem(kind, name, value, psi_level(value), labels, expected, actual)


def _check_reference(reference: Mapping[str, Any]) -> None:
    kind = reference.get("kind") if isinstance(reference, Mapping) else None
    needed = {"numeric": ("edges", "shares", "missing"), "categorical": ("shares", "missing")}
    if kind not in needed or any(k not in reference for k in needed[kind]):
        raise DataError(
            f"A reference distribution has kind {kind!r} or lacks keys; expected a numeric "
            "(edges, shares, missing) or categorical (shares, missing) reference. Retrain "
            "the model to record a current one."
        )
