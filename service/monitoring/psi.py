"""Population stability index between a reference distribution and a recent one."""

from __future__ import annotations

import numpy as np
import numpy.typing as npt

from service.errors import DataError

__all__ = ["PSI_ACT", "PSI_WATCH", "SHARE_FLOOR", "psi", "psi_level"]

# Common practice, no source: PSI below 0.1 is read as stable, 0.1 to 0.25 as a shift to
# watch, and 0.25 or more as a shift to act on (investigate, retrain).
PSI_WATCH = 0.1
PSI_ACT = 0.25

# Common practice, no source: an empty bin gets this share instead of 0, so the
# logarithm stays finite and one empty bin cannot make the index infinite.
SHARE_FLOOR = 1e-4


def psi(expected: npt.ArrayLike, actual: npt.ArrayLike, *, floor: float = SHARE_FLOOR) -> float:
    """``PSI = sum_i (a_i - e_i) * ln(a_i / e_i)`` over the bins of two distributions.

    Parameters
    ----------
    expected : shares of the reference (training) population per bin.
    actual : shares of the recent population in the same bins.
    floor : share given to an empty bin (in either distribution) before the sum.

    Returns
    -------
    float
        0 for identical distributions; larger means a larger shift (it is the symmetric
        Kullback-Leibler divergence, J-divergence, of the binned distributions).

    References
    ----------
    Yurdakul, B. (2018). Statistical properties of population stability index. Doctoral
    dissertation, Western Michigan University.
    """
    e = np.asarray(expected, dtype=np.float64)
    a = np.asarray(actual, dtype=np.float64)
    if e.shape != a.shape or e.ndim != 1 or not len(e):
        raise DataError(
            f"expected and actual must be 1-d share vectors over the same bins; got shapes "
            f"{e.shape} and {a.shape}."
        )
    if (e < 0).any() or (a < 0).any() or not (np.isfinite(e).all() and np.isfinite(a).all()):
        raise DataError("Bin shares must be finite and non-negative.")
    e = np.maximum(e, floor)
    a = np.maximum(a, floor)
    return float(np.sum((a - e) * np.log(a / e)))


def psi_level(value: float) -> str:
    """``"stable"`` below :data:`PSI_WATCH`, ``"watch"`` below :data:`PSI_ACT`, else ``"act"``."""
    if value < PSI_WATCH:
        return "stable"
    return "watch" if value < PSI_ACT else "act"
