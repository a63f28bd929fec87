"""Demo data: a retention campaign of Larkspur Tea Club, a fictional tea subscription.

Everything here is invented for the demo. The features are business facts of a made-up
company (no age, gender, ethnicity or any other protected attribute); the effects are
chosen so that all four response groups occur and are driven by those facts.
"""

from __future__ import annotations

import numpy as np
import numpy.typing as npt
import pandas as pd

from service.simulation._draw import (
    FloatArray,
    RandomState,
    _check_n,
    _check_shares,
    _missing,
    _rng,
    _sigmoid,
)
from service.simulation._mixture import _mixture_campaign
from service.simulation.campaign import SimulatedCampaign

__all__ = ["larkspur_campaign"]

_PLANS = np.array(["sampler", "classic", "connoisseur"])
_REGIONS = np.array(["north", "south", "east", "west"])
_CHANNELS = np.array(["web", "app", "referral", "gift", "market_stall"])
_BASE_SPEND = np.array([12.0, 21.0, 36.0])  # per plan, in the club's currency
_MISSING_SPEND = 0.06
_MISSING_REGION = 0.04

# Renewal probability per group (sure thing, lost cause, sleeping dog) under
# (none, email, call); persuadables depend on price sensitivity, see larkspur_campaign.
_OTHER_GROUPS = np.array([[0.92, 0.93, 0.94], [0.08, 0.09, 0.12], [0.75, 0.55, 0.35]])


def _customer_ids(n: int) -> npt.NDArray[np.str_]:
    width = max(6, len(str(n)))
    numbers = np.char.zfill(np.arange(1, n + 1).astype(str), width)
    ids: npt.NDArray[np.str_] = np.char.add("LTC-", numbers)
    return ids


def _scaled(values: FloatArray, center: float, spread: float) -> FloatArray:
    # Fixed population constants (measured once on 2 million draws), not sample moments,
    # so a customer's true effect never depends on who else is in the sample.
    out: FloatArray = (values - center) / spread
    return out


def larkspur_campaign(
    n: int = 20000,
    *,
    shares: tuple[float, float, float] = (0.4, 0.4, 0.2),
    random_state: RandomState = 0,
) -> SimulatedCampaign:
    """Simulate Larkspur Tea Club's randomized retention campaign (fictional demo data).

    Before renewal, each subscriber was randomly sent an "email" voucher, a "call" from
    the care team, or nothing ("none"); the outcome ``renewed`` is 1 if the subscription
    was renewed. Features: ``tenure_months``, ``monthly_spend`` (about 6% missing),
    ``cups_logged_last_30d``, ``support_tickets_90d``, ``plan`` ("sampler", "classic",
    "connoisseur"), ``region`` ("north", "south", "east", "west"; about 4% missing) and
    ``signup_channel``; ``ids`` holds customer ids such as ``"LTC-000123"``.

    The latent response groups follow the facts: heavy tea drinkers with long tenure and
    the connoisseur plan renew anyway (sure things); gift sign-ups and customers who log
    almost no cups leave anyway (lost causes); long-tenure customers who barely use the
    club, or who filed several support tickets, renew out of habit but are reminded to
    cancel by a contact (sleeping dogs); moderately engaged customers on cheaper plans
    are persuadable. A persuadable renews with probability 0.15 without contact,
    ``0.35 + 0.25 p`` after an email voucher and ``0.40 + 0.25 (1 - p)`` after a call,
    where ``p`` (price sensitivity) falls with monthly spend: vouchers win the
    price-sensitive, calls the big spenders. The call costs the club far more than the
    email, so the better arm for a person depends on cost as well as on effect.

    Parameters
    ----------
    n : int, default 20000
        Number of customers.
    shares : tuple of three floats, default (0.4, 0.4, 0.2)
        Randomized assignment probabilities of ("none", "email", "call").
    random_state : int, numpy.random.Generator or None, default 0
        Seed of ``numpy.random.default_rng``.

    Returns
    -------
    SimulatedCampaign
        Binary outcome ``renewed``, ``control="none"``, ``arms=("email", "call")``, with
        ``groups`` and ``ids``.

    References
    ----------
    .. [1] N. J. Radcliffe and P. D. Surry, "Real-world uplift modelling with
       significance-based uplift trees", Stochastic Solutions white paper, 2011
       (the four response groups).
    """
    n = _check_n(n)
    labels = ("none", "email", "call")
    share_array = _check_shares(shares, labels)
    rng = _rng(random_state)

    plan = rng.choice(3, size=n, p=[0.3, 0.5, 0.2])
    channel = rng.choice(5, size=n, p=[0.4, 0.25, 0.15, 0.1, 0.1])
    region = rng.choice(4, size=n, p=[0.3, 0.25, 0.2, 0.25])
    gift = channel == 3
    tenure = 1.0 + np.floor(rng.gamma(1.3, np.where(gift, 5.0, 16.0)))
    tenure = np.minimum(tenure, 120.0)
    engagement = rng.standard_normal(n) + 0.3 * (plan - 1)
    cups = np.minimum(rng.poisson(np.exp(2.3 + 0.7 * engagement)), 120).astype(float)
    spend = np.round(_BASE_SPEND[plan] * rng.lognormal(0.0, 0.15, n), 2)
    tickets = rng.poisson(np.exp(-1.2 + 0.8 * rng.standard_normal(n))).astype(float)

    t = _scaled(np.log(tenure), 2.57, 1.0)
    c = _scaled(np.log1p(cups), 2.35, 0.74)
    s = _scaled(spend, 21.5, 9.1)
    forgotten = np.maximum(t, 0.0) * np.maximum(-c, 0.0)
    cheaper_plan = (plan < 2).astype(float)
    logits = np.column_stack(
        [
            2.0 + 1.5 * cheaper_plan + 1.5 * (channel == 2) - 2.5 * np.abs(c),  # persuadable
            4.0 * c + 1.5 * t + 2.0 * (plan == 2) - 1.0 * tickets,  # sure thing
            -4.0 * c + 4.0 * gift - 1.5 * t - 1.5,  # lost cause
            5.0 * forgotten + 2.0 * tickets - 1.5,  # sleeping dog
        ]
    )
    price_sensitivity = _sigmoid(-1.5 * s)
    response = np.empty((n, 4, 3))
    response[:, 0] = np.column_stack(
        [np.full(n, 0.15), 0.35 + 0.25 * price_sensitivity, 0.40 + 0.25 * (1 - price_sensitivity)]
    )
    response[:, 1:] = _OTHER_GROUPS

    spend_seen = np.where(_missing(rng, n, _MISSING_SPEND), np.nan, spend)
    region_seen = pd.Series(_REGIONS[region], dtype="str")
    region_seen[_missing(rng, n, _MISSING_REGION)] = np.nan
    X = pd.DataFrame(
        {
            "tenure_months": tenure.astype(np.int64),
            "monthly_spend": spend_seen,
            "cups_logged_last_30d": cups.astype(np.int64),
            "support_tickets_90d": tickets.astype(np.int64),
            "plan": pd.Series(_PLANS[plan], dtype="str"),
            "region": region_seen,
            "signup_channel": pd.Series(_CHANNELS[channel], dtype="str"),
        }
    )
    return _mixture_campaign(
        rng,
        X=X,
        logits=logits,
        response=response,
        labels=labels,
        shares=share_array,
        name="larkspur",
        ids=_customer_ids(n),
        outcome_name="renewed",
    )
