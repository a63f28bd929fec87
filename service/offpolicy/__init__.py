"""Off-policy evaluation and realized lift from a decision log (pure numpy).

Actions are numbered 0 (no contact) and 1..K (arms). A log gives, per decision, the
action taken, the logging policy's full action distribution (``action_probs``) and the
observed reward; a target policy is an (n, 1 + K) matrix of action probabilities
(:func:`one_hot` for a deterministic one).

* :func:`evaluate_policy`: IPS, self-normalised IPS and doubly robust value of a target
  policy with intervals, Kish's effective sample size and a support check.
* :func:`compare_policies`: the paired difference in value of two target policies.
* :func:`realized_lift`: what the logged policy delivered against its randomized control.
"""

from __future__ import annotations

from service.offpolicy.compare import compare_policies
from service.offpolicy.estimators import (
    Estimate,
    critical_value,
    dr_estimate,
    ips_estimate,
    mean_with_interval,
    snips_estimate,
)
from service.offpolicy.evaluate import LOW_ESS_SHARE, OffPolicyEvaluation, evaluate_policy
from service.offpolicy.lift import (
    Alternative,
    RealizedLift,
    TargetedLift,
    realized_lift,
    two_sample_difference,
)
from service.offpolicy.support import Support, check_support
from service.offpolicy.weights import effective_sample_size, importance_weights, one_hot

__all__ = [
    "LOW_ESS_SHARE",
    "Alternative",
    "Estimate",
    "OffPolicyEvaluation",
    "RealizedLift",
    "Support",
    "TargetedLift",
    "check_support",
    "compare_policies",
    "critical_value",
    "dr_estimate",
    "effective_sample_size",
    "evaluate_policy",
    "importance_weights",
    "ips_estimate",
    "mean_with_interval",
    "one_hot",
    "realized_lift",
    "snips_estimate",
    "two_sample_difference",
]
