"""Shared, vectorised building blocks of the designs: argument checks and random draws."""

from __future__ import annotations

from collections.abc import Sequence
from typing import Any

import numpy as np
import numpy.typing as npt

from service.errors import DataError

FloatArray = npt.NDArray[np.float64]
RandomState = int | np.random.Generator | None


def _rng(random_state: RandomState) -> np.random.Generator:
    if isinstance(random_state, np.random.Generator):
        return random_state
    if random_state is not None and (
        isinstance(random_state, bool) or not isinstance(random_state, int | np.integer)
    ):
        raise DataError(
            f"random_state={random_state!r} is not usable; pass an integer seed, a "
            "numpy Generator, or None."
        )
    return np.random.default_rng(random_state)


def _check_n(n: int) -> int:
    if isinstance(n, bool) or not isinstance(n, int | np.integer) or n < 1:
        raise DataError(f"n={n!r} is not a usable row count; pass a positive integer.")
    return int(n)


def _check_shares(shares: Sequence[float], labels: Sequence[Any]) -> FloatArray:
    """Validate assignment shares ``[control, *arms]``: each in (0, 1), summing to 1."""
    array = np.asarray(shares, dtype=float)
    if array.shape != (len(labels),):
        raise DataError(
            f"Assignment shares {tuple(shares)} do not match the labels {tuple(labels)}; "
            "give one share per label, control first."
        )
    if np.any(array <= 0.0) or np.any(array >= 1.0) or not np.isclose(array.sum(), 1.0):
        raise DataError(
            f"Assignment shares {tuple(shares)} must each lie strictly between 0 and 1 and "
            "sum to 1, so that every label is randomized with a known probability."
        )
    normalized: FloatArray = array / array.sum()
    return normalized


def _softmax(logits: FloatArray) -> FloatArray:
    shifted = np.exp(logits - logits.max(axis=1, keepdims=True))
    probs: FloatArray = shifted / shifted.sum(axis=1, keepdims=True)
    return probs


def _sigmoid(z: FloatArray) -> FloatArray:
    out: FloatArray = 0.5 * (1.0 + np.tanh(0.5 * z))
    return out


def _draw_index(rng: np.random.Generator, probs: FloatArray) -> npt.NDArray[np.intp]:
    """Draw one column index per row from row-wise probabilities ``probs`` (n, k)."""
    cumulative = np.cumsum(probs, axis=1)
    u = rng.random(probs.shape[0]) * cumulative[:, -1]
    index: npt.NDArray[np.intp] = np.minimum(
        (u[:, None] >= cumulative).sum(axis=1), probs.shape[1] - 1
    )
    return index


def _missing(rng: np.random.Generator, n: int, share: float) -> npt.NDArray[np.bool_]:
    """Mask of cells to blank out completely at random."""
    mask: npt.NDArray[np.bool_] = rng.random(n) < share
    return mask
