"""Simulation setups A-D of Nie & Wager (2021): continuous outcome, one arm, known effect."""

from __future__ import annotations

from collections.abc import Callable
from typing import Literal

import numpy as np
import pandas as pd

from service.errors import DataError
from service.simulation._draw import FloatArray, RandomState, _check_n, _rng, _sigmoid
from service.simulation.campaign import SimulatedCampaign

__all__ = ["nie_wager"]

Setup = Literal["A", "B", "C", "D"]
_Truth = tuple[FloatArray, FloatArray, FloatArray]  # propensity e, mean b, effect tau


def _setup_a(x: FloatArray) -> _Truth:
    # Confounded through sin(pi x1 x2), which drives both the propensity and the baseline.
    s = np.sin(np.pi * x[:, 0] * x[:, 1])
    e = np.clip(s, 0.1, 0.9)
    b = s + 2.0 * (x[:, 2] - 0.5) ** 2 + x[:, 3] + 0.5 * x[:, 4]
    tau = (x[:, 0] + x[:, 1]) / 2.0
    return e, b, tau


def _setup_b(x: FloatArray) -> _Truth:
    # A randomized trial with a complicated baseline and a moderately complex effect.
    e = np.full(len(x), 0.5)
    b = np.maximum.reduce([np.zeros(len(x)), x[:, 0] + x[:, 1], x[:, 2]]) + np.maximum(
        0.0, x[:, 3] + x[:, 4]
    )
    tau = x[:, 0] + np.logaddexp(0.0, x[:, 1])
    return e, b, tau


def _setup_c(x: FloatArray) -> _Truth:
    # Strong confounding and a constant effect: the hard part is the nuisance, not tau.
    e = _sigmoid(-(x[:, 1] + x[:, 2]))
    b = 2.0 * np.logaddexp(0.0, x[:, 0] + x[:, 1] + x[:, 2])
    tau = np.ones(len(x))
    return e, b, tau


def _setup_d(x: FloatArray) -> _Truth:
    # Treated and control arms follow unrelated functions, so tau is as complex as b.
    e = 1.0 / (1.0 + np.exp(-x[:, 0]) + np.exp(-x[:, 1]))
    first = np.maximum(x[:, 0] + x[:, 1] + x[:, 2], 0.0)
    second = np.maximum(x[:, 3] + x[:, 4], 0.0)
    return e, (first + second) / 2.0, first - second


_SETUPS: dict[str, Callable[[FloatArray], _Truth]] = {
    "A": _setup_a,
    "B": _setup_b,
    "C": _setup_c,
    "D": _setup_d,
}


def _covariates(setup: str, rng: np.random.Generator, n: int, d: int) -> FloatArray:
    if setup == "A":
        return rng.random((n, d))
    return rng.standard_normal((n, d))


def nie_wager(
    setup: Setup,
    n: int = 1000,
    *,
    d: int = 6,
    sigma: float = 1.0,
    random_state: RandomState = 0,
) -> SimulatedCampaign:
    """Simulate setup A, B, C or D of Nie & Wager (2021).

    Every setup draws ``X`` (uniform on [0, 1]^d in A, standard normal otherwise), a
    treatment ``W ~ Bernoulli(e(X))`` labelled 0/1, and
    ``Y = b(X) + (W - 0.5) tau(X) + sigma * eps`` with ``eps ~ N(0, 1)``. ``b`` is the mean
    of the two potential outcomes, so ``mu0 = b - tau / 2``. With ``x1..x5`` the first
    five features (formulas from memory of the paper):

    - A: ``e = trim_0.1(sin(pi x1 x2))``, ``b = sin(pi x1 x2) + 2 (x3 - 0.5)^2 + x4 +
      0.5 x5``, ``tau = (x1 + x2) / 2``;
    - B: ``e = 0.5``, ``b = max(0, x1 + x2, x3) + max(0, x4 + x5)``,
      ``tau = x1 + log(1 + exp(x2))``;
    - C: ``e = 1 / (1 + exp(x2 + x3))``, ``b = 2 log(1 + exp(x1 + x2 + x3))``, ``tau = 1``;
    - D: ``e = 1 / (1 + exp(-x1) + exp(-x2))``,
      ``b = (max(x1 + x2 + x3, 0) + max(x4 + x5, 0)) / 2``,
      ``tau = max(x1 + x2 + x3, 0) - max(x4 + x5, 0)``.

    Only B is randomized; A, C and D are confounded through ``e(X)``, so a plain
    difference in means is biased there while inverse-propensity weighting is not.

    Parameters
    ----------
    setup : {"A", "B", "C", "D"}
        Which setup to simulate.
    n : int, default 1000
        Number of rows. The paper used n in {500, 1000} (from memory).
    d : int, default 6
        Number of features, at least 5. The paper used d in {6, 12} (from memory).
    sigma : float, default 1.0
        Noise standard deviation; the paper varied it over {0.5, 1, 2, 4} (from memory).
    random_state : int, numpy.random.Generator or None, default 0
        Seed of ``numpy.random.default_rng``.

    Returns
    -------
    SimulatedCampaign
        Continuous outcome, ``control=0``, ``arms=(1,)``, features ``x1..xd``.

    References
    ----------
    .. [1] X. Nie and S. Wager, "Quasi-oracle estimation of heterogeneous treatment
       effects", Biometrika 108(2), 299-319, 2021.
    """
    key = str(setup).upper()
    if key not in _SETUPS:
        raise DataError(f"Nie & Wager setup {setup!r} does not exist; choose A, B, C or D.")
    n = _check_n(n)
    if isinstance(d, bool) or not isinstance(d, int) or d < 5:
        raise DataError(f"d={d!r} features is too few; the setups read x1..x5, so pass d >= 5.")
    if not np.isfinite(sigma) or sigma < 0:
        raise DataError(f"sigma={sigma!r} is not a noise level; pass a finite number >= 0.")
    rng = _rng(random_state)
    x = _covariates(key, rng, n, d)
    e, b, tau = _SETUPS[key](x)
    w = (rng.random(n) < e).astype(np.int64)
    y = b + (w - 0.5) * tau + sigma * rng.standard_normal(n)
    return SimulatedCampaign(
        X=pd.DataFrame(x, columns=[f"x{j}" for j in range(1, d + 1)]),
        treatment=w,
        y=y,
        tau=tau[:, None],
        mu0=b - tau / 2.0,
        propensity=np.where(w == 1, e, 1.0 - e),
        propensity_matrix=np.column_stack([1.0 - e, e]),
        control=0,
        arms=(1,),
        outcome_type="continuous",
        name=f"nw_{key.lower()}",
    )
