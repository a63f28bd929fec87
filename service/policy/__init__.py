"""Campaign policies: expected value, do-not-contact, exploration, holdout, ranking.

Everything here is a pure function of arrays and thresholds: the service loads a campaign
file with :func:`load_campaigns`, draws deterministic uniforms with
:func:`uniform_draws`, decides with :func:`decide` and, for contact lists, ranks with
:func:`rank`. :func:`uniform_draw` and :func:`decide_one` are the same for one customer
without NumPy overhead (the low-latency scoring path).
"""

from __future__ import annotations

from service.policy.campaign import NO_CONTACT, ArmCost, Campaign, policy_hash
from service.policy.decide import REASONS, DecisionBatch, decide
from service.policy.draws import Draws, uniform_draw, uniform_draws, uniform_hash
from service.policy.exploration import choice_probabilities, explore_pick, final_probabilities
from service.policy.loader import load_campaigns, parse_campaigns
from service.policy.pilot import (
    PILOT_MODEL,
    PILOT_REASON,
    pilot_decide,
    pilot_decide_one,
    pilot_draw,
)
from service.policy.rank import EXCLUSION_REASONS, RankResult, budget_price, rank
from service.policy.single import Decision, decide_one, decision_row
from service.policy.value import (
    do_not_contact_flags,
    expected_values,
    greedy_actions,
    two_sided_level,
)

__all__ = [
    "EXCLUSION_REASONS",
    "NO_CONTACT",
    "PILOT_MODEL",
    "PILOT_REASON",
    "REASONS",
    "ArmCost",
    "Campaign",
    "Decision",
    "DecisionBatch",
    "Draws",
    "RankResult",
    "budget_price",
    "choice_probabilities",
    "decide",
    "decide_one",
    "decision_row",
    "do_not_contact_flags",
    "expected_values",
    "explore_pick",
    "final_probabilities",
    "greedy_actions",
    "load_campaigns",
    "parse_campaigns",
    "pilot_decide",
    "pilot_decide_one",
    "pilot_draw",
    "policy_hash",
    "rank",
    "two_sided_level",
    "uniform_draw",
    "uniform_draws",
    "uniform_hash",
]
