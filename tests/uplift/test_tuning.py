"""Tuned nuisance models: chosen on the rows given to fit only, reused, and honest."""

from __future__ import annotations

import numpy as np
import pytest
import statsmodels.api as sm
from sklearn.base import clone

from service.simulation import simulate
from service.uplift import BootstrapUplift, RLearner, TLearner, make_learner, r_targets
from service.uplift._tuning import GBM_GRID, LINEAR_GRID, _smallest


def test_each_role_records_a_choice_from_the_grid() -> None:
    sim = simulate("groups_two_arms", n=1500, random_state=0)
    learner = RLearner(random_state=0).fit(sim.X, sim.y, sim.treatment)
    assert set(learner.tuning_) == {"outcome:0", "outcome:1", "outcome:2", "effect:1", "effect:2"}
    shapes = [{k: g[k] for k in ("max_leaf_nodes", "min_samples_leaf")} for g in GBM_GRID]
    for choice in learner.tuning_.values():
        params = choice["params"]
        assert {k: params[k] for k in ("max_leaf_nodes", "min_samples_leaf")} in shapes
        assert len(choice["losses"]) == len(GBM_GRID)
        # The kept setting is the one with the smallest held-out loss.
        kept = [g["max_leaf_nodes"] for g in GBM_GRID].index(params["max_leaf_nodes"])
        assert kept == int(np.argmin(choice["losses"]))
        assert params["max_iter"] >= 1 and params["early_stopping"] is False


def test_linear_penalty_is_chosen_by_held_out_loss() -> None:
    sim = simulate("groups", n=2000, random_state=1)
    learner = TLearner(base="linear", random_state=0).fit(sim.X, sim.y, sim.treatment)
    for choice in learner.tuning_.values():
        kept = LINEAR_GRID[True].index(choice["params"])
        assert kept == int(np.argmin(choice["losses"]))


def test_the_smallest_weighted_held_out_loss_wins_and_ties_go_to_the_simpler() -> None:
    # Hastie, Tibshirani & Friedman (2009), sec. 7.10: keep the setting with the smallest
    # estimated prediction error; weights count as repeated rows (numpy.average).
    rng = np.random.default_rng(0)
    best = rng.exponential(1.0, 2000)
    w = np.ones(2000)
    slightly_worse = best + 0.001
    assert _smallest([slightly_worse, best], w)[0] == 1
    assert _smallest([best, best.copy()], w)[0] == 0
    # Weight only the first half of the rows: the candidate better there wins.
    first_half = np.r_[np.ones(1000), np.zeros(1000)]
    better_first = np.r_[best[:1000] - 0.1, best[1000:] + 1.0]
    assert _smallest([best, better_first], w)[0] == 0
    index, means = _smallest([best, better_first], first_half)
    assert index == 1
    assert means[1] == pytest.approx(best[:1000].mean() - 0.1)


def test_tuning_sees_only_the_rows_given_to_fit() -> None:
    # Fitting on a subset must give the same model whatever the other rows hold: the
    # choice cannot leak from rows a cross-validation fold holds out.
    sim = simulate("groups", n=1200, random_state=2)
    rows = np.arange(800)
    first = TLearner(random_state=0).fit(sim.X.iloc[rows], sim.y[rows], sim.treatment[rows])
    other_y = sim.y.copy()
    other_y[800:] = 1 - other_y[800:]
    second = TLearner(random_state=0).fit(sim.X.iloc[rows], other_y[rows], sim.treatment[rows])
    assert first.tuning_ == second.tuning_
    np.testing.assert_array_equal(first.predict(sim.X), second.predict(sim.X))


def test_bootstrap_replicates_reuse_the_full_fit_choice() -> None:
    sim = simulate("groups", n=1000, random_state=3)
    model = BootstrapUplift(TLearner(random_state=0), n_bootstrap=3, random_state=0)
    model.fit(sim.X, sim.y, sim.treatment)
    chosen = model.estimator_.tuning_["outcome:1"]["params"]
    for replicate in model.replicates_:
        booster = replicate.models_[1]
        assert booster.max_leaf_nodes == chosen["max_leaf_nodes"]
        assert booster.n_iter_ == chosen["max_iter"]


def test_untuned_learners_keep_the_fixed_defaults() -> None:
    sim = simulate("groups", n=600, random_state=4)
    learner = make_learner("t", tune=False, random_state=0).fit(sim.X, sim.y, sim.treatment)
    assert learner.tuning_ == {}
    assert learner.models_[0].learning_rate == 0.05
    assert clone(learner).get_params()["tune"] is False


def test_r_targets_give_the_partialling_out_estimate_of_statsmodels_ols() -> None:
    # Reference: with a constant effect the R-loss is least squares of y - m(x) on
    # t - e(x) without intercept (Robinson 1988, Econometrica 56(4); the
    # Frisch-Waugh-Lovell residual regression), here fitted by statsmodels OLS.
    rng = np.random.default_rng(5)
    n = 3000
    x = rng.normal(size=n)
    e = 1 / (1 + np.exp(-0.5 * x))
    t = rng.random(n) < e
    y = 1 + x + 0.7 * t + rng.normal(size=n)
    mu0, mu1 = 1 + x, 1.7 + x
    target, weight = r_targets(y, t, mu0, mu1, e)
    constant_tau = np.average(target, weights=weight)
    m = e * mu1 + (1 - e) * mu0
    ols = sm.OLS(y - m, (t - e)[:, None]).fit()
    assert constant_tau == pytest.approx(ols.params[0], rel=1e-9)
    assert abs(ols.params[0] - 0.7) < 3 * ols.bse[0]
