"""Reference distributions of features and scores, saved at training for drift checks.

A numeric reference holds interior bin ``edges`` (training deciles, duplicates removed)
and the share of non-missing training values in each of the ``len(edges) + 1`` bins,
where bin ``i`` holds ``edges[i - 1] < x <= edges[i]`` and the outer bins are open; plus
the share of missing values. A categorical reference holds the share of each training
category, and of missing values. :func:`bin_shares` bins new values the same way, so a
population stability index compares like with like.

References
----------
Yurdakul, B. (2018). Statistical properties of population stability index. Doctoral
dissertation, Western Michigan University (PSI and its binning).
"""

from __future__ import annotations

from typing import Any

import numpy as np
import pandas as pd

__all__ = ["bin_shares", "categorical_reference", "numeric_reference"]

_QUANTILES = np.linspace(0.1, 0.9, 9)


def numeric_reference(values: Any) -> dict[str, Any]:
    """Decile bin edges and shares of a numeric column (missing values counted apart)."""
    array = pd.to_numeric(pd.Series(np.asarray(values).ravel()), errors="coerce").to_numpy(
        dtype=float, na_value=np.nan
    )
    present = array[np.isfinite(array)]
    edges = np.unique(np.quantile(present, _QUANTILES)) if len(present) else np.array([])
    reference: dict[str, Any] = {"kind": "numeric", "edges": [float(e) for e in edges]}
    reference["shares"] = _numeric_shares(edges, present)
    reference["missing"] = float(1.0 - len(present) / len(array)) if len(array) else 0.0
    return reference


def categorical_reference(values: Any) -> dict[str, Any]:
    """Share of each category among non-missing values, and the share missing."""
    series = pd.Series(np.asarray(values, dtype=object).ravel())
    present = series[series.notna()].astype(str)
    counts = present.value_counts()
    shares = {str(k): float(v / len(present)) for k, v in sorted(counts.items())}
    missing = float(1.0 - len(present) / len(series)) if len(series) else 0.0
    return {"kind": "categorical", "shares": shares, "missing": missing}


def _numeric_shares(edges: np.ndarray, present: np.ndarray) -> list[float]:
    if not len(present):
        return [0.0] * (len(edges) + 1)
    bins = np.searchsorted(edges, present, side="left")
    counts = np.bincount(bins, minlength=len(edges) + 1)
    return [float(c / len(present)) for c in counts]


def bin_shares(reference: dict[str, Any], values: Any) -> dict[str, Any]:
    """Bin new ``values`` like ``reference``; same layout as the reference itself.

    Categories unseen in training are pooled under ``"__other__"``.
    """
    if reference["kind"] == "numeric":
        fresh = numeric_reference(values)
        array = pd.to_numeric(pd.Series(np.asarray(values).ravel()), errors="coerce")
        present = array.to_numpy(dtype=float, na_value=np.nan)
        present = present[np.isfinite(present)]
        edges = np.asarray(reference["edges"], dtype=float)
        return {
            "kind": "numeric",
            "edges": list(reference["edges"]),
            "shares": _numeric_shares(edges, present),
            "missing": fresh["missing"],
        }
    fresh = categorical_reference(values)
    known = set(reference["shares"])
    shares = {k: fresh["shares"].get(k, 0.0) for k in reference["shares"]}
    other = sum(v for k, v in fresh["shares"].items() if k not in known)
    if other:
        shares["__other__"] = other
    return {"kind": "categorical", "shares": shares, "missing": fresh["missing"]}
