"""Out-of-fold permutation importance on the uplift score."""

from __future__ import annotations

import numpy as np

from service.evaluation import cross_validated_uplift
from service.uplift import TLearner
from tests.evaluation.segment_world import step_segments


def test_features_that_drive_the_uplift_rank_first() -> None:
    # The "step segments" design: only plan and tenure_months move the uplift.
    X, y, t, _ = step_segments(4000, 0)
    cv = cross_validated_uplift(
        TLearner(tune=False, random_state=0), X, y, t, n_splits=3, importance=True
    )
    assert cv.importance is not None
    # Shuffling a noise feature moves a noisy T-learner's score too (score_change), but
    # only the features that carry the effect cost ranking quality (qini_drop).
    drop = {name: v["qini_drop"] for name, v in cv.importance.items()}
    assert min(drop["plan"], drop["tenure_months"]) > 5 * max(drop["spend"], drop["region"])
    assert all(np.isfinite(v["score_change"]) for v in cv.importance.values())
    assert list(cv.importance)[0] == "tenure_months"  # sorted by score_change


def test_importance_is_off_by_default() -> None:
    X, y, t, _ = step_segments(600, 1)
    cv = cross_validated_uplift(TLearner(base="linear", tune=False), X, y, t, n_splits=3)
    assert cv.importance is None
