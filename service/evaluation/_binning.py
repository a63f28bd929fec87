"""Assign ranked rows to score bins without ever splitting a tie group.

Bins are numbered from 1 (highest scores) to ``n_bins`` and are contiguous slices of the
rows sorted by descending score.
"""

from __future__ import annotations

import numpy as np
from numpy.typing import NDArray

from service.errors import DataError
from service.evaluation._ranking import _Cumulative, _Ranked

IntArray = NDArray[np.int64]

_SLACK = 1e-9


def _check_bins(n_bins: int) -> None:
    if isinstance(n_bins, bool) or not isinstance(n_bins, int | np.integer) or n_bins < 1:
        raise DataError(f"n_bins must be a positive integer, got {n_bins!r}.")


def _quantile_bins(ranked: _Ranked, cum: _Cumulative, n_bins: int) -> IntArray:
    """Bin of each ranked row by the weight quantile at the middle of its tie group.

    A group whose middle falls in ((b - 1) / n_bins, b / n_bins] of the cumulative weight
    goes to bin b, so bins hold about equal weight and tied rows share a bin.
    """
    middle = (cum.x[:-1] + cum.x[1:]) / 2.0
    # The slack keeps a middle that sits on an edge up to rounding in the lower bin.
    group_bin = np.clip(np.ceil(middle * n_bins - _SLACK), 1, n_bins).astype(np.int64)
    sizes = np.diff(ranked.ends, prepend=0)
    return np.repeat(group_bin, sizes)


def _uniform_bins(ranked: _Ranked, n_bins: int) -> IntArray:
    """Bin of each ranked row by equal-width intervals of the score range."""
    score = ranked.pair.score
    if not np.isfinite(score).all():
        raise DataError("score has infinite values; uniform bins need a finite score range.")
    edges = np.linspace(score.min(), score.max(), n_bins + 1)
    below = np.searchsorted(edges[1:-1], score, side="right")
    return (n_bins - below).astype(np.int64)
