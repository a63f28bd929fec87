"""Customers needed to detect an uplift: two-group sample sizes by the normal approximation."""

from __future__ import annotations

import math
from dataclasses import dataclass

from scipy.stats import norm

from service.errors import DataError

__all__ = ["GroupSizes", "sample_size_amount", "sample_size_proportions"]


@dataclass(frozen=True)
class GroupSizes:
    """Customers needed in the contacted group and in the control group."""

    contacted: int
    control: int

    @property
    def total(self) -> int:
        """Both groups together."""
        return self.contacted + self.control


def _check(power: float, alpha: float, ratio: float) -> tuple[float, float]:
    if not (0.0 < alpha < 1.0):
        raise DataError(f"alpha={alpha!r} must lie in (0, 1), e.g. 0.05.")
    if not (0.0 < power < 1.0):
        raise DataError(f"power={power!r} must lie in (0, 1), e.g. 0.8.")
    if not (math.isfinite(ratio) and ratio > 0):
        raise DataError(f"ratio={ratio!r} (control per contacted customer) must be > 0.")
    return float(norm.ppf(1.0 - alpha / 2.0)), float(norm.ppf(power))


def sample_size_proportions(
    baseline: float, uplift: float, *, power: float = 0.8, alpha: float = 0.05, ratio: float = 1.0
) -> GroupSizes:
    """Group sizes for a two-sided test that a response rate rises from ``baseline`` by
    ``uplift``, with ``ratio`` control customers per contacted customer.

    With ``p1 = baseline + uplift``, ``p0 = baseline``, ``r = ratio`` and the pooled rate
    ``pbar = (p1 + r p0) / (1 + r)``, the contacted group needs

    ``n1 = [z_(1-alpha/2) sqrt(pbar (1 - pbar) (1 + 1/r)) + z_power sqrt(p1 q1 + p0 q0 / r)]^2
    / uplift^2``

    and the control group ``r * n1`` (both rounded up): the variance under the null uses
    the pooled rate, under the alternative each group's own rate.

    References
    ----------
    Fleiss, Levin & Paik (2003), *Statistical Methods for Rates and Proportions*, 3rd ed.,
    Wiley, ch. 4 (sample size for comparing two proportions, without continuity
    correction); Fleiss, Tytun & Ury (1980), Biometrics 36(2), 343-346 (unequal group
    sizes). Chapter and equation from memory.
    """
    z_a, z_b = _check(power, alpha, ratio)
    p1 = baseline + uplift
    if not (0.0 < baseline < 1.0 and 0.0 < p1 < 1.0) or uplift == 0:
        raise DataError(
            f"baseline={baseline!r} and baseline + uplift={p1!r} must both lie in (0, 1), "
            "and uplift must not be 0; give rates as fractions (3% is 0.03)."
        )
    pbar = (p1 + ratio * baseline) / (1.0 + ratio)
    null = z_a * math.sqrt(pbar * (1.0 - pbar) * (1.0 + 1.0 / ratio))
    alt = z_b * math.sqrt(p1 * (1.0 - p1) + baseline * (1.0 - baseline) / ratio)
    n1 = (null + alt) ** 2 / uplift**2
    return GroupSizes(math.ceil(n1 - 1e-9), math.ceil(ratio * n1 - 1e-9))


def sample_size_amount(
    uplift: float, sd: float, *, power: float = 0.8, alpha: float = 0.05, ratio: float = 1.0
) -> GroupSizes:
    """Group sizes for a two-sided z-test that a mean amount rises by ``uplift`` when the
    amount has standard deviation ``sd`` in both groups:
    ``n1 = (z_(1-alpha/2) + z_power)^2 sd^2 (1 + 1/r) / uplift^2``, control ``r * n1``.

    References
    ----------
    Chow, Shao & Wang (2008), *Sample Size Calculations in Clinical Research*, 2nd ed.,
    Chapman & Hall, sec. 3.2 (two-sample parallel design, normal approximation; from
    memory).
    """
    z_a, z_b = _check(power, alpha, ratio)
    if not (math.isfinite(sd) and sd > 0):
        raise DataError(f"sd={sd!r} must be a positive number (the amount's standard deviation).")
    if not math.isfinite(uplift) or uplift == 0:
        raise DataError(f"uplift={uplift!r} must be a non-zero amount.")
    n1 = (z_a + z_b) ** 2 * sd**2 * (1.0 + 1.0 / ratio) / uplift**2
    return GroupSizes(math.ceil(n1 - 1e-9), math.ceil(ratio * n1 - 1e-9))
