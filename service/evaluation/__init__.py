"""Uplift evaluation: Qini and uplift curves, Qini coefficient, AUUC, uplift at top k%,
per-bin tables, profit curves and a per-arm summary for reports.

All functions take plain arrays (numpy or pandas): an outcome ``y``, a ``treatment``
indicator or labels (with ``control=`` and ``arm=`` to pick a pair), a ``score`` (the
predicted uplift of one arm) and optional ``sample_weight``. Ties in the score are never
split, so no result depends on the order of the rows.
"""

from __future__ import annotations

from service.evaluation.areas import auuc, qini_coefficient
from service.evaluation.curves import Curve, perfect_qini_curve, qini_curve, uplift_curve
from service.evaluation.profit import profit_curve
from service.evaluation.report import evaluate_uplift
from service.evaluation.selection import (
    CrossValidated,
    SelectionResult,
    cross_validated_uplift,
    select_learner,
)
from service.evaluation.tables import calibration_table, decile_table
from service.evaluation.topk import UpliftEstimate, uplift_at_top

__all__ = [
    # curves
    "Curve",
    "qini_curve",
    "uplift_curve",
    "perfect_qini_curve",
    "profit_curve",
    # single numbers
    "qini_coefficient",
    "auuc",
    "UpliftEstimate",
    "uplift_at_top",
    # tables and reports
    "decile_table",
    "calibration_table",
    "evaluate_uplift",
    # learner selection
    "CrossValidated",
    "SelectionResult",
    "cross_validated_uplift",
    "select_learner",
]
