"""Expected value of each arm, the do-not-contact rule, and the greedy choice.

Pure functions on arrays; every threshold is an argument.
"""

from __future__ import annotations

import math

import numpy as np
import numpy.typing as npt

from service.errors import PolicyError

__all__ = ["do_not_contact_flags", "expected_values", "greedy_actions", "two_sided_level"]

FloatArray = npt.NDArray[np.float64]
BoolArray = npt.NDArray[np.bool_]
IntArray = npt.NDArray[np.intp]


def expected_values(tau: FloatArray, values: FloatArray | float, costs: FloatArray) -> FloatArray:
    """``EV[i, a] = value_i * tau[i, a] - cost_a``: incremental value of contact a, net of cost.

    ``tau`` has shape (n, K) (uplift per arm against no contact), ``values`` shape (n,)
    or a scalar, ``costs`` shape (K,). No contact has EV 0 by definition.

    References
    ----------
    Hansotia & Rukstales (2002), "Incremental value modeling", Journal of Interactive
    Marketing 16(3), 35-46 (targeting on incremental value; citation from memory).
    """
    value_column = np.asarray(values, dtype=np.float64).reshape(-1, 1)
    ev: FloatArray = value_column * tau - np.asarray(costs, dtype=np.float64)[None, :]
    return ev


def do_not_contact_flags(high: FloatArray, margin: float) -> BoolArray:
    """Flag arm a for customer i when the upper bound of its uplift is below ``-margin``.

    The flag needs the whole interval to lie on the harmful side, so a wide (noisy)
    estimate never suppresses anyone; a point estimate below zero alone does not either.
    """
    flags: BoolArray = np.asarray(high, dtype=np.float64) < -margin
    return flags


def two_sided_level(confidence: float) -> float:
    """Two-sided interval level whose upper bound is a one-sided bound at ``confidence``.

    A two-sided interval at level L leaves (1 - L) / 2 above its upper end, so its upper
    end is a one-sided upper bound at level (1 + L) / 2; solving for L gives
    ``2 * confidence - 1`` (confidence 0.90 -> request a two-sided 0.80 interval, whose
    upper end is the 90% one-sided bound, ``mean + 1.2816 * se`` for a normal interval).
    """
    if not (math.isfinite(confidence) and 0.5 < confidence < 1.0):
        raise PolicyError(
            f"confidence={confidence!r} must lie in (0.5, 1) to give a one-sided upper bound; "
            "use e.g. 0.90."
        )
    return 2.0 * confidence - 1.0


def greedy_actions(ev: FloatArray, allowed: BoolArray) -> IntArray:
    """The best allowed arm (1..K) where its EV is positive, else 0 (no contact).

    Ties go to the first arm in declaration order (``argmax`` keeps the first).
    """
    masked = np.where(allowed, ev, -np.inf)
    best = np.argmax(masked, axis=1) if masked.shape[1] else np.zeros(len(ev), dtype=np.intp)
    best_ev = np.take_along_axis(masked, best[:, None], axis=1)[:, 0]
    actions: IntArray = np.where(best_ev > 0, best + 1, 0).astype(np.intp)
    return actions
