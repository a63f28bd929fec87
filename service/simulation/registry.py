"""Look simulation designs up by name."""

from __future__ import annotations

from collections.abc import Callable, Mapping
from functools import partial
from types import MappingProxyType
from typing import Any

from service.errors import NotFoundError
from service.simulation._draw import RandomState
from service.simulation.campaign import SimulatedCampaign
from service.simulation.groups import response_groups, response_groups_two_arms
from service.simulation.larkspur import larkspur_campaign
from service.simulation.nie_wager import nie_wager

__all__ = ["DESIGNS", "Design", "simulate"]


Design = Callable[..., SimulatedCampaign]
"""A registered design: called as ``design(n, random_state=..., **options)``."""


DESIGNS: Mapping[str, Design] = MappingProxyType(
    {
        "nw_a": partial(nie_wager, "A"),
        "nw_b": partial(nie_wager, "B"),
        "nw_c": partial(nie_wager, "C"),
        "nw_d": partial(nie_wager, "D"),
        "groups": response_groups,
        "groups_two_arms": response_groups_two_arms,
        "larkspur": larkspur_campaign,
    }
)
"""Every design by name (read-only)."""


def simulate(
    name: str, n: int = 10000, random_state: RandomState = 0, **options: Any
) -> SimulatedCampaign:
    """Simulate ``n`` rows of the design registered as ``name``.

    Parameters
    ----------
    name : str
        A key of :data:`DESIGNS`.
    n : int, default 10000
        Number of rows.
    random_state : int, numpy.random.Generator or None, default 0
        Seed of ``numpy.random.default_rng``.
    **options
        Further keyword arguments of the design, e.g. ``sigma`` for ``"nw_a"`` or
        ``treated_share`` for ``"groups"``.

    Returns
    -------
    SimulatedCampaign
    """
    try:
        design = DESIGNS[name]
    except KeyError:
        raise NotFoundError(
            f"Simulation design {name!r} does not exist; choose one of {sorted(DESIGNS)}."
        ) from None
    return design(n, random_state=random_state, **options)
