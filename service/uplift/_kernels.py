"""Compiled evaluation of a :class:`~service.uplift._flatten.Program` (numba).

One call scores a block of encoded rows: every tree of every model of every replicate,
the learner's combination step, and the normal interval. The interval's half-width is
``z`` times either the standard deviation over the bootstrap replicates (the full form)
or ``exp`` of a fitted model of the log standard deviation (the compact form, whose
replicate 1 holds that model per arm). The kernels release the GIL, so callers may split
a large batch across threads.
"""

from __future__ import annotations

from collections.abc import Callable
from typing import Any, TypeVar, cast

import numba
import numpy as np

__all__ = ["score_rows"]

_F = TypeVar("_F", bound=Callable[..., Any])


def _jit(func: _F) -> _F:
    # cache=True writes the machine code beside this file (or to NUMBA_CACHE_DIR), so
    # only the first process on a machine pays the compile time.
    return cast(_F, numba.njit(cache=True, nogil=True)(func))


@_jit
def _tree_value(
    head: np.ndarray, right: np.ndarray, value: np.ndarray, bitsets: np.ndarray, node: int,
    rows: np.ndarray, r: int,
) -> float:  # fmt: skip
    """Walk one tree; the routing follows scikit-learn's ``_predict_one_from_raw_data``."""
    while True:
        code = head[node]
        if code < 0:
            return value[node]  # type: ignore[no-any-return]
        x = rows[r, code >> 2]
        if np.isnan(x):
            left = (code & 1) != 0
        elif code & 2:
            if 0.0 <= x < 256.0 and x == np.floor(x):
                category, words = int(x), int(value[node])
                left = ((bitsets[words, category >> 5] >> (category & 31)) & 1) != 0
            else:  # not a category code: the model would see an unknown category
                left = (code & 1) != 0
        else:
            left = x <= value[node]
        node = node + 1 if left else right[node]


@_jit
def _linear_value(
    term_int: np.ndarray,
    term_float: np.ndarray,
    table: np.ndarray,
    first: int,
    stop: int,
    row: np.ndarray,
) -> float:
    """Sum of the linear terms (imputed and scaled numeric, indicator, one-hot)."""
    total = 0.0
    for k in range(first, stop):
        value = row[term_int[k, 0]]
        kind = term_int[k, 1]
        if kind == 0:
            if np.isnan(value):
                value = term_float[k, 0]
            total += (value - term_float[k, 1]) / term_float[k, 2] * term_float[k, 3]
        elif kind == 1:
            flag = 1.0 if np.isnan(value) else 0.0
            total += (flag - term_float[k, 1]) / term_float[k, 2] * term_float[k, 3]
        elif np.isnan(value):
            total += term_float[k, 0]
        elif 0.0 <= value < term_int[k, 3] and value == np.floor(value):
            total += table[term_int[k, 2] + int(value)]
    return total


@_jit
def _unit_values(
    unit: int,
    rows: np.ndarray,
    head: np.ndarray,
    right: np.ndarray,
    value: np.ndarray,
    bitsets: np.ndarray,
    roots: np.ndarray,
    unit_int: np.ndarray,
    unit_base: np.ndarray,
    term_int: np.ndarray,
    term_float: np.ndarray,
    table: np.ndarray,
    out: np.ndarray,
) -> None:
    """One unit on each row of ``rows``; trees outermost so a tree stays in cache."""
    first, stop = unit_int[unit, 2], unit_int[unit, 3]
    n_rows = rows.shape[0]
    if unit_int[unit, 0] == 0:
        # Same order as scikit-learn: the baseline, then each tree in turn.
        out[:n_rows] = unit_base[unit]
        for tree in range(first, stop):
            for r in range(n_rows):
                out[r] += _tree_value(head, right, value, bitsets, roots[tree], rows, r)
    else:
        for r in range(n_rows):
            linear = _linear_value(term_int, term_float, table, first, stop, rows[r])
            out[r] = linear + unit_base[unit]
    if unit_int[unit, 1] == 1:
        for r in range(n_rows):
            out[r] = 1.0 / (1.0 + np.exp(-out[r]))


@_jit
def _interval(
    out: np.ndarray, z: float, spread: int, tau: np.ndarray, low: np.ndarray, high: np.ndarray
) -> None:
    """Point estimate (replicate 0) and normal bounds: from the bootstrap replicates
    (``spread == 0``), or from the log standard deviation in replicate 1 (``spread == 1``)."""
    n_replicates = out.shape[0] - 1
    for a in range(tau.shape[0]):
        tau[a] = out[0, a]
        if spread == 1:
            half = z * np.exp(out[1, a])
            low[a] = out[0, a] - half
            high[a] = out[0, a] + half
            continue
        if n_replicates < 2:
            low[a] = np.nan
            high[a] = np.nan
            continue
        mean = 0.0
        for b in range(1, n_replicates + 1):
            mean += out[b, a]
        mean /= n_replicates
        squares = 0.0
        for b in range(1, n_replicates + 1):
            squares += (out[b, a] - mean) ** 2
        half = z * np.sqrt(squares / (n_replicates - 1))
        low[a] = out[0, a] - half
        high[a] = out[0, a] + half


@_jit
def score_rows(
    X: np.ndarray,
    z: float,
    head: np.ndarray,
    right: np.ndarray,
    value: np.ndarray,
    bitsets: np.ndarray,
    roots: np.ndarray,
    unit_int: np.ndarray,
    unit_base: np.ndarray,
    term_int: np.ndarray,
    term_float: np.ndarray,
    table: np.ndarray,
    eval_unit: np.ndarray,
    eval_arm: np.ndarray,
    comb_int: np.ndarray,
    comb_coef: np.ndarray,
    n_replicates: int,
    spread: int,
    tau: np.ndarray,
    mu0: np.ndarray,
    low: np.ndarray,
    high: np.ndarray,
) -> None:
    """Fill ``tau``, ``mu0``, ``low``, ``high`` for the encoded rows ``X``.

    Rows go in blocks of 64. ``z`` is the normal quantile of the interval; ``spread``
    says where its width comes from (see :func:`_interval`); with ``spread == 0`` and
    fewer than two bootstrap replicates the bounds are NaN.
    """
    n_rows, n_features = X.shape
    n_arms, n_evals = tau.shape[1], eval_unit.shape[0]
    block = min(64, n_rows)
    rows = np.empty((block, n_features + 1))
    values = np.empty((n_evals, block))
    out = np.empty((n_replicates + 1, n_arms + 1))
    for start in range(0, n_rows, block):
        size = min(block, n_rows - start)
        rows[:size, :n_features] = X[start : start + size]
        for e in range(n_evals):
            rows[:size, n_features] = eval_arm[e]
            _unit_values(
                eval_unit[e], rows[:size], head, right, value, bitsets, roots, unit_int,
                unit_base, term_int, term_float, table, values[e],
            )  # fmt: skip
        for r in range(size):
            out[:] = 0.0
            for c in range(comb_int.shape[0]):
                out[comb_int[c, 0], comb_int[c, 1]] += comb_coef[c] * values[comb_int[c, 2], r]
            i = start + r
            mu0[i] = out[0, n_arms]
            _interval(out, z, spread, tau[i], low[i], high[i])
