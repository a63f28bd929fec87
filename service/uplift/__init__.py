"""Uplift learners: per-arm incremental effect of a contact, learned from campaigns.

Every learner follows the scikit-learn estimator contract and the same interface:
``fit(X, y, treatment, *, propensity=None, sample_weight=None)``, ``predict(X)`` (uplift
per arm, shape (n, n_arms)), ``predict_control(X)`` and ``predict_effects(X)``.
:class:`BootstrapUplift` adds ``predict_interval``.
"""

from __future__ import annotations

from typing import Any

from service.errors import DataError
from service.uplift._base import UpliftLearner
from service.uplift._features import FeatureEncoder, FeatureSpec
from service.uplift.bootstrap import BootstrapUplift
from service.uplift.dr_learner import DRLearner, dr_pseudo_outcomes
from service.uplift.r_learner import RLearner, r_targets
from service.uplift.s_learner import SLearner
from service.uplift.t_learner import TLearner
from service.uplift.transformed import TransformedOutcomeLearner
from service.uplift.x_learner import XLearner

__all__ = [
    "LEARNERS",
    "BootstrapUplift",
    "DRLearner",
    "FeatureEncoder",
    "FeatureSpec",
    "RLearner",
    "SLearner",
    "TLearner",
    "TransformedOutcomeLearner",
    "UpliftLearner",
    "XLearner",
    "dr_pseudo_outcomes",
    "make_learner",
    "r_targets",
]

LEARNERS: dict[str, type[UpliftLearner]] = {
    "t": TLearner,
    "s": SLearner,
    "x": XLearner,
    "dr": DRLearner,
    "r": RLearner,
    "transformed": TransformedOutcomeLearner,
}


def make_learner(name: str, **params: Any) -> UpliftLearner:
    """Build a learner by its short name (``t``, ``s``, ``x``, ``dr``, ``r``, ``transformed``)."""
    try:
        cls = LEARNERS[name]
    except KeyError:
        raise DataError(f"Unknown learner {name!r}; choose one of {sorted(LEARNERS)}.") from None
    return cls(**params)
