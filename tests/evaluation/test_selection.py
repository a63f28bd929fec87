"""Learner selection by out-of-fold Qini."""

from __future__ import annotations

import numpy as np
import pytest

from service.errors import DataError
from service.evaluation import cross_validated_uplift, evaluate_uplift, select_learner
from service.simulation import simulate
from service.uplift import SLearner, TLearner


@pytest.fixture(scope="module")
def campaign():  # type: ignore[no-untyped-def]
    return simulate("groups_two_arms", n=3000, random_state=3)


def test_out_of_fold_predictions_come_from_models_that_never_saw_the_row(campaign) -> None:  # type: ignore[no-untyped-def]
    result = cross_validated_uplift(
        TLearner(base="linear", random_state=0),
        campaign.X,
        campaign.y,
        campaign.treatment,
        n_splits=4,
    )
    assert result.oof.shape == (3000, 2) and sorted(set(result.fold)) == [0, 1, 2, 3]
    # every fold holds every arm (stratified by arm and outcome)
    for k in range(4):
        assert set(campaign.treatment[result.fold == k]) == {"none", "email", "call"}
    # each fold's rows are predicted by the model fitted on the other folds
    rows = result.fold == 2
    # (Seeded: the tuned penalty's held-out split is drawn from the learner's seed.)
    refit = TLearner(base="linear", random_state=0).fit(
        campaign.X[~rows], campaign.y[~rows], campaign.treatment[~rows]
    )
    np.testing.assert_allclose(result.oof[rows], refit.predict(campaign.X[rows]), atol=1e-9)
    recomputed = evaluate_uplift(
        campaign.y, campaign.treatment, result.oof, result.arms, result.control
    )
    assert recomputed == result.metrics
    mean, low, high = result.qini_interval
    assert low < mean < high


def test_selection_prefers_a_learner_that_can_rank(campaign) -> None:  # type: ignore[no-untyped-def]
    # A linear S-learner gives every customer the same uplift (no arm interactions), so it
    # cannot rank anyone; trees on two models can.
    chosen = select_learner(
        {"flat": SLearner(base="linear"), "trees": TLearner(random_state=0)},
        campaign.X,
        campaign.y,
        campaign.treatment,
        n_splits=3,
    )
    assert chosen.best == "trees"
    assert chosen.scores["trees"] > chosen.scores["flat"] + 0.1


def test_selection_needs_candidates(campaign) -> None:  # type: ignore[no-untyped-def]
    with pytest.raises(DataError, match="No candidate learners"):
        select_learner({}, campaign.X, campaign.y, campaign.treatment)
