"""Learner selection by out-of-fold Qini."""

from __future__ import annotations

import numpy as np
import pytest
import statsmodels.api as sm
from causaldata import thornton_hiv
from scipy.optimize import minimize_scalar
from statsmodels.stats.weightstats import CompareMeans

from service.errors import DataError
from service.evaluation import cross_validated_uplift, evaluate_uplift, select_learner
from service.evaluation.selection import r_loss
from service.simulation import simulate
from service.uplift import SLearner, TLearner, TransformedOutcomeLearner


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


def test_r_loss_is_smallest_at_the_difference_of_means_on_thornton() -> None:
    # Thornton (2008), American Economic Review 98(5): a randomized cash incentive
    # (`any`) to collect HIV test results (`got`), as shipped by the PyPI package
    # `causaldata`. With a constant effect c and constant nuisances (arm shares, arm
    # means), the R-loss of Nie & Wager (2021) is a least-squares problem in c whose
    # minimiser is Robinson's (1988) estimate: the no-intercept OLS slope of y - m on
    # t - e, here the difference of the arms' response rates. Checked against
    # statsmodels' OLS and scipy's minimiser.
    data = thornton_hiv.load_pandas().data.dropna(subset=["any", "got"])
    y, t = data["got"].to_numpy(float), data["any"].to_numpy(int)
    e = t.mean()
    propensity = np.tile([1 - e, e], (len(y), 1))
    mu = np.tile([y[t == 0].mean(), y[t == 1].mean()], (len(y), 1))
    m = (1 - e) * mu[:, 0] + e * mu[:, 1]
    slope = sm.OLS(y - m, t - e).fit().params[0]
    best = minimize_scalar(
        lambda c: r_loss(y, t, np.full((len(y), 1), c), mu, propensity)[0],
        bounds=(-1, 1),
        method="bounded",
        options={"xatol": 1e-9},
    )
    assert best.x == pytest.approx(slope, abs=1e-6)
    difference = CompareMeans.from_data(y[t == 1], y[t == 0]).tconfint_diff(usevar="unequal")
    assert difference[0] < slope < difference[1]
    assert slope == pytest.approx(y[t == 1].mean() - y[t == 0].mean(), abs=1e-9)


def test_selection_screens_out_effects_the_r_loss_rejects() -> None:
    # Setup C of Nie & Wager (2021), Biometrika 108(2): a constant true effect, so any
    # ranking is noise. The transformed outcome's noisy effects still win the
    # out-of-fold Qini here, but their R-loss is about twice the T-learner's, far
    # beyond one standard error, so the T-learner is chosen.
    campaign = simulate("nw_c", n=2000, random_state=0)
    chosen = select_learner(
        {
            "t": TLearner(base="linear", random_state=0),
            "transformed": TransformedOutcomeLearner(base="linear", random_state=0),
        },
        campaign.X,
        campaign.y,
        campaign.treatment,
        n_splits=3,
    )
    assert chosen.scores["transformed"] > chosen.scores["t"]
    assert chosen.r_losses["transformed"] > 1.5 * chosen.r_losses["t"]
    assert chosen.best == "t"


def test_selection_r_loss_is_the_r_loss_of_the_out_of_fold_effects(campaign) -> None:  # type: ignore[no-untyped-def]
    chosen = select_learner(
        {"s": SLearner(base="linear"), "t": TLearner(base="linear", random_state=0)},
        campaign.X,
        campaign.y,
        campaign.treatment,
        n_splits=3,
    )
    nuisance = chosen.results["t"]
    labels = [nuisance.control, *nuisance.arms]
    arm_index = np.array([labels.index(label) for label in campaign.treatment])
    shares = np.bincount(arm_index) / len(arm_index)
    mu0 = nuisance.oof_control
    assert mu0 is not None
    mu = np.column_stack([mu0, mu0[:, None] + nuisance.oof])
    for name, result in chosen.results.items():
        order = [result.arms.index(arm) for arm in nuisance.arms]
        expected = r_loss(
            campaign.y,
            arm_index,
            result.oof[:, order],
            mu,
            np.tile(shares, (len(arm_index), 1)),
        ).mean()
        assert chosen.r_losses[name] == pytest.approx(expected, rel=1e-9)
