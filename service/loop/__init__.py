"""The learning loop around the decision log: realized lift, replay, promotion, export.

:func:`read_logged` joins a campaign's decisions with their outcomes;
:func:`campaign_lift` measures what the policy delivered against its randomized control
(:func:`plot_lift` draws it); :func:`replay` estimates a candidate model's policy value
on the log and :func:`replay_gate` judges a challenger against the champion;
:func:`export_training_table` writes the inverse-propensity-weighted training table the
next version is trained on.
"""

from __future__ import annotations

from service.loop.export import (
    EXPORT_KIND,
    SIDECAR_SUFFIX,
    ExportResult,
    export_from_log,
    export_training_table,
    read_provenance,
    sidecar_path,
    training_arguments,
)
from service.loop.gate import GATE_METHODS, GATE_RULES, ReplayGate, replay_gate
from service.loop.lift import COVERAGE_GAP, LiftReport, campaign_lift
from service.loop.logged import LoggedDecisions, iter_logged, read_logged, utc_text
from service.loop.plot import plot_lift
from service.loop.replay import (
    REWARD_MODELS,
    ReplayResult,
    candidate_actions,
    greedy_policy,
    replay,
    rewards,
)

__all__ = [
    "COVERAGE_GAP",
    "EXPORT_KIND",
    "GATE_METHODS",
    "GATE_RULES",
    "REWARD_MODELS",
    "SIDECAR_SUFFIX",
    "ExportResult",
    "LiftReport",
    "LoggedDecisions",
    "ReplayGate",
    "ReplayResult",
    "campaign_lift",
    "candidate_actions",
    "export_from_log",
    "export_training_table",
    "greedy_policy",
    "iter_logged",
    "plot_lift",
    "read_logged",
    "read_provenance",
    "replay",
    "replay_gate",
    "rewards",
    "sidecar_path",
    "training_arguments",
    "utc_text",
]
