"""Logged decisions a replay needs to tell a better challenger, from the effective sample size."""

from __future__ import annotations

import math
from dataclasses import dataclass

from scipy.stats import norm

from service.errors import DataError

__all__ = ["ReplayVolume", "replay_volume"]


@dataclass(frozen=True)
class ReplayVolume:
    """What a replay needs: effective sample size, logged decisions, and the share of
    decisions that counts fully (``ess_per_decision``); ``decisions`` is infinite when
    the log gives the challenger's departures no support (no exploration)."""

    effective_sample_size: int
    ess_per_decision: float
    decisions: float


def replay_volume(
    *,
    margin: float,
    sd: float,
    exploration: float,
    holdout: float,
    arms: int = 1,
    agreement: float = 0.0,
    power: float = 0.8,
    alpha: float = 0.05,
) -> ReplayVolume:
    """Decisions a replay needs to tell a challenger better by ``margin`` per decision.

    1. The paired difference of two policy values is estimated with a variance of about
       ``2 sd^2 / ESS`` (conservative: as for two independent estimates), so a two-sided
       test at ``alpha`` with the given ``power`` needs
       ``ESS = (z_(1-alpha/2) + z_power)^2 * 2 sd^2 / margin^2``.
    2. A deterministic candidate replayed by IPS keeps, per logged decision, Kish's
       effective sample size ``1 / E[1/p]``, where p is the logged probability of the
       candidate's action: ``p_agree = (1 - h)(1 - e + e/m)`` where it acts as the logging
       policy did, ``p_depart = (1 - h) e / m`` where it contacts someone through an arm
       the logging policy did not choose (m = arms + 1 options, e = exploration, h =
       holdout). With a share ``agreement`` of decisions alike,
       ``ESS / N = 1 / (agreement / p_agree + (1 - agreement) / p_depart)``.
       ``agreement = 0`` (the default) is the case that matters for telling two models
       apart: where they differ, only the randomized share speaks.

    References
    ----------
    Kish (1965), *Survey Sampling*, Wiley (effective sample size of weighted data);
    Horvitz & Thompson (1952), JASA 47(260) (inverse-probability weighting). The
    factor 2 for the paired difference is a conservative simplification (no source).
    """
    if not (math.isfinite(margin) and margin > 0):
        raise DataError(f"margin={margin!r} must be a positive gain per decision.")
    if not (math.isfinite(sd) and sd > 0):
        raise DataError(f"sd={sd!r} must be a positive standard deviation per decision.")
    for name, rate in (("exploration", exploration), ("holdout", holdout)):
        if not (0.0 <= rate < 1.0):
            raise DataError(f"{name}={rate!r} must lie in [0, 1).")
    if not (0.0 <= agreement <= 1.0):
        raise DataError(f"agreement={agreement!r} must lie in [0, 1].")
    if arms < 1:
        raise DataError(f"arms={arms!r} must be at least 1.")
    if not (0.0 < alpha < 1.0 and 0.0 < power < 1.0):
        raise DataError("alpha and power must lie in (0, 1).")
    z = float(norm.ppf(1.0 - alpha / 2.0) + norm.ppf(power))
    ess = math.ceil(z**2 * 2.0 * sd**2 / margin**2 - 1e-9)
    options = arms + 1
    p_agree = (1.0 - holdout) * (1.0 - exploration + exploration / options)
    p_depart = (1.0 - holdout) * exploration / options
    if p_depart == 0 and agreement < 1:
        return ReplayVolume(ess, 0.0, math.inf)
    depart = (1.0 - agreement) / p_depart if agreement < 1 else 0.0
    per_decision = 1.0 / (agreement / p_agree + depart)
    return ReplayVolume(ess, per_decision, math.ceil(ess / per_decision - 1e-9))
