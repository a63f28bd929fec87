"""Binary designs with all four response groups, for one contact arm and for two."""

from __future__ import annotations

import numpy as np
import pandas as pd

from service.errors import DataError
from service.simulation._draw import (
    FloatArray,
    RandomState,
    _check_n,
    _check_shares,
    _rng,
    _sigmoid,
)
from service.simulation._mixture import _mixture_campaign
from service.simulation.campaign import SimulatedCampaign

__all__ = ["response_groups", "response_groups_two_arms"]

_SEGMENTS = np.array(["a", "b", "c"])

# Response probability of each group (persuadable, sure thing, lost cause, sleeping dog)
# without and with contact. Chosen for this design; none is 0 or 1, so outcomes stay noisy.
_ONE_ARM = np.array([[0.05, 0.60], [0.80, 0.85], [0.05, 0.07], [0.55, 0.15]])


def _check_separation(separation: float) -> float:
    if not np.isfinite(separation) or separation <= 0:
        raise DataError(
            f"separation={separation!r} is not usable; pass a positive number "
            "(1 is the default, larger makes the response groups easier to tell apart)."
        )
    return float(separation)


def _features(rng: np.random.Generator, n: int) -> tuple[pd.DataFrame, FloatArray]:
    """Six standard-normal features and one categorical ``segment``; return also the logits."""
    x = rng.standard_normal((n, 6))
    segment = _SEGMENTS[rng.choice(3, size=n, p=[0.4, 0.35, 0.25])]
    in_a, in_c = (segment == "a").astype(float), (segment == "c").astype(float)
    logits = np.column_stack(
        [
            2.0 * x[:, 0] + 1.5 * in_a,  # persuadable
            2.0 * x[:, 1] + 0.75 * x[:, 0],  # sure thing
            -2.0 * x[:, 1] - 0.75 * x[:, 0] - 0.75,  # lost cause
            2.0 * x[:, 2] + (x[:, 3] ** 2 - 1.0) + 1.5 * in_c - 0.75 * x[:, 0],  # dog
        ]
    )
    frame = pd.DataFrame(x, columns=[f"x{j}" for j in range(1, 7)])
    frame["segment"] = pd.Series(segment, dtype="str")
    return frame, logits


def response_groups(
    n: int = 10000,
    *,
    treated_share: float = 0.5,
    separation: float = 1.0,
    random_state: RandomState = 0,
) -> SimulatedCampaign:
    """Simulate a randomized binary campaign with persuadables, sure things, lost causes
    and sleeping dogs.

    Features are ``x1..x6`` (standard normal) and ``segment`` (``"a"``, ``"b"``, ``"c"``).
    Each row belongs to a latent response group drawn from a softmax of feature functions
    (``x1`` and segment "a" raise the odds of a persuadable, ``x2`` of a sure thing, low
    ``x2`` of a lost cause, ``x3``, ``|x4|`` and segment "c" of a sleeping dog; ``x5`` and
    ``x6`` are noise), scaled by ``separation``. Response probabilities without -> with
    contact: persuadable 0.05 -> 0.60, sure thing 0.80 -> 0.85, lost cause 0.05 -> 0.07,
    sleeping dog 0.55 -> 0.15. Treatment (labels 0/1) is randomized with probability
    ``treated_share``. The true uplift of a row is the difference of its
    membership-weighted response probabilities.

    Parameters
    ----------
    n : int, default 10000
        Number of rows.
    treated_share : float, default 0.5
        Probability of contact, strictly between 0 and 1.
    separation : float, default 1.0
        Multiplies the group logits; larger values make the groups sharper.
    random_state : int, numpy.random.Generator or None, default 0
        Seed of ``numpy.random.default_rng``.

    Returns
    -------
    SimulatedCampaign
        Binary outcome, ``control=0``, ``arms=(1,)``, with ``groups``.

    References
    ----------
    .. [1] N. J. Radcliffe and P. D. Surry, "Real-world uplift modelling with
       significance-based uplift trees", Stochastic Solutions white paper, 2011
       (the four response groups).
    """
    n = _check_n(n)
    shares = _check_shares([1.0 - treated_share, treated_share], [0, 1])
    separation = _check_separation(separation)
    rng = _rng(random_state)
    X, logits = _features(rng, n)
    return _mixture_campaign(
        rng,
        X=X,
        logits=separation * logits,
        response=_ONE_ARM,
        labels=(0, 1),
        shares=shares,
        name="groups",
    )


def response_groups_two_arms(
    n: int = 10000,
    *,
    shares: tuple[float, float, float] = (0.4, 0.3, 0.3),
    separation: float = 1.0,
    random_state: RandomState = 0,
) -> SimulatedCampaign:
    """Simulate the four-group binary campaign with two contact arms, "email" and "call".

    Features and latent groups are those of :func:`response_groups`. The call is the
    stronger (and, in practice, the costlier) contact, and which arm moves a persuadable
    more depends on ``x5``: with ``s = sigmoid(2 x5)``, a persuadable responds with
    probability 0.05 without contact, ``0.05 + 0.55 s`` to an email and
    ``0.10 + 0.55 (1 - s)`` to a call. Other groups (none / email / call): sure thing
    0.80 / 0.82 / 0.85, lost cause 0.05 / 0.06 / 0.08, sleeping dog 0.55 / 0.40 / 0.15.

    Parameters
    ----------
    n : int, default 10000
        Number of rows.
    shares : tuple of three floats, default (0.4, 0.3, 0.3)
        Randomized assignment probabilities of ("none", "email", "call").
    separation : float, default 1.0
        Multiplies the group logits; larger values make the groups sharper.
    random_state : int, numpy.random.Generator or None, default 0
        Seed of ``numpy.random.default_rng``.

    Returns
    -------
    SimulatedCampaign
        Binary outcome, ``control="none"``, ``arms=("email", "call")``, with ``groups``.

    References
    ----------
    .. [1] N. J. Radcliffe and P. D. Surry, "Real-world uplift modelling with
       significance-based uplift trees", Stochastic Solutions white paper, 2011
       (the four response groups).
    """
    n = _check_n(n)
    labels = ("none", "email", "call")
    share_array = _check_shares(shares, labels)
    separation = _check_separation(separation)
    rng = _rng(random_state)
    X, logits = _features(rng, n)
    s = _sigmoid(2.0 * X["x5"].to_numpy())
    response = np.empty((n, 4, 3))
    response[:, 0] = np.column_stack([np.full(n, 0.05), 0.05 + 0.55 * s, 0.10 + 0.55 * (1 - s)])
    response[:, 1:] = np.array([[0.80, 0.82, 0.85], [0.05, 0.06, 0.08], [0.55, 0.40, 0.15]])
    return _mixture_campaign(
        rng,
        X=X,
        logits=separation * logits,
        response=response,
        labels=labels,
        shares=share_array,
        name="groups_two_arms",
    )
