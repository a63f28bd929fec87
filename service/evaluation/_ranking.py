"""Sort a pair by descending score and accumulate counts at tie-group boundaries.

Rows with equal scores form one tie group and are never split: curves are evaluated only
where the score changes, so no result depends on the order of the input rows. Within a
group the rows are put in a fixed order (by treatment, outcome, weight) so that even the
floating-point sums are identical for any permutation of the input.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

from service.evaluation._pairs import FloatArray, _Pair

IndexArray = NDArray[np.intp]


@dataclass(frozen=True)
class _Ranked:
    """A pair sorted by descending score; ``ends[g]`` is the exclusive end of group ``g``."""

    pair: _Pair
    ends: IndexArray


@dataclass(frozen=True)
class _Cumulative:
    """Weighted counts and outcome sums of each arm after each whole tie group.

    Every array starts with 0 (nothing targeted); ``x`` is the fraction of the total
    weight targeted and ends at exactly 1.
    """

    x: FloatArray
    n_t: FloatArray
    n_c: FloatArray
    y_t: FloatArray
    y_c: FloatArray


def _rank(pair: _Pair) -> _Ranked:
    # lexsort's last key is the primary one; reversing gives descending order in all keys.
    order = np.lexsort((pair.weight, pair.y, pair.treated, pair.score))[::-1]
    ranked = _Pair(pair.y[order], pair.treated[order], pair.score[order], pair.weight[order])
    changes = np.flatnonzero(ranked.score[1:] != ranked.score[:-1]) + 1
    ends = np.append(changes, len(order)).astype(np.intp)
    return _Ranked(ranked, ends)


def _cumulate(ranked: _Ranked) -> _Cumulative:
    pair = ranked.pair
    w_t = np.where(pair.treated, pair.weight, 0.0)
    w_c = np.where(pair.treated, 0.0, pair.weight)

    def at_ends(values: FloatArray) -> FloatArray:
        return np.concatenate(([0.0], np.cumsum(values)[ranked.ends - 1]))

    n_t, n_c = at_ends(w_t), at_ends(w_c)
    n = n_t + n_c
    return _Cumulative(n / n[-1], n_t, n_c, at_ends(w_t * pair.y), at_ends(w_c * pair.y))
