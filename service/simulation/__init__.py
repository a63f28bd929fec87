"""Seeded data generators whose true effects are known, for tests, benchmarks and the demo.

Every design returns a :class:`SimulatedCampaign`: features, assigned treatment, observed
outcome, and the truth beside them (uplift per arm, outcome without contact,
propensities). Look designs up by name in :data:`DESIGNS` or call :func:`simulate`.
The Larkspur Tea Club data is invented and is for the demo only.
"""

from __future__ import annotations

from service.simulation._mixture import RESPONSE_GROUPS
from service.simulation.campaign import Label, SimulatedCampaign
from service.simulation.groups import response_groups, response_groups_two_arms
from service.simulation.larkspur import larkspur_campaign
from service.simulation.nie_wager import nie_wager
from service.simulation.registry import DESIGNS, Design, simulate

__all__ = [
    "DESIGNS",
    "RESPONSE_GROUPS",
    "Design",
    "Label",
    "SimulatedCampaign",
    "larkspur_campaign",
    "nie_wager",
    "response_groups",
    "response_groups_two_arms",
    "simulate",
]
