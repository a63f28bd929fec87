"""Tuned nuisance models: chosen on the rows given to fit only, reused, and honest."""

from __future__ import annotations

import numpy as np
import pytest
import statsmodels.api as sm
from sklearn.base import clone

from service.simulation import simulate
from service.uplift import BootstrapUplift, RLearner, TLearner, make_learner, r_targets
from service.uplift._tuning import GBM_GRID, LINEAR_GRID, _choose


def test_each_role_records_a_choice_from_the_grid() -> None:
    sim = simulate("groups_two_arms", n=1500, random_state=0)
    learner = RLearner(random_state=0).fit(sim.X, sim.y, sim.treatment)
    assert set(learner.tuning_) == {"outcome:0", "outcome:1", "outcome:2", "effect:1", "effect:2"}
    shapes = [{k: g[k] for k in ("max_leaf_nodes", "min_samples_leaf")} for g in GBM_GRID]
    for role, choice in learner.tuning_.items():
        params = choice["params"]
        assert {k: params[k] for k in ("max_leaf_nodes", "min_samples_leaf")} in shapes
        assert len(choice["losses"]) == len(GBM_GRID)
        kept = [g["max_leaf_nodes"] for g in GBM_GRID].index(params["max_leaf_nodes"])
        if role.startswith("outcome"):  # the observed outcome: the smallest held-out loss
            assert kept == int(np.argmin(choice["losses"]))
        else:  # a constructed target: the best or a simpler setting (one-SE rule)
            assert kept <= int(np.argmin(choice["losses"]))
        assert params["max_iter"] >= 1 and params["early_stopping"] is False


def test_linear_penalty_is_chosen_by_held_out_loss() -> None:
    sim = simulate("groups", n=2000, random_state=1)
    learner = TLearner(base="linear", random_state=0).fit(sim.X, sim.y, sim.treatment)
    for choice in learner.tuning_.values():
        kept = LINEAR_GRID[True].index(choice["params"])
        assert kept == int(np.argmin(choice["losses"]))


def test_the_smallest_loss_wins_unless_a_simpler_one_is_within_one_standard_error() -> None:
    # Hastie, Tibshirani & Friedman (2009), sec. 7.10: the smallest estimated prediction
    # error, or the simplest model whose error is within one standard error of the best.
    rng = np.random.default_rng(0)
    best = rng.exponential(1.0, 2000)
    w = np.ones(2000)
    within = best + rng.normal(0.0, 0.5, 2000) + 0.001  # worse by much less than its SE
    beyond = best + 0.2  # worse by far more than its SE
    assert _choose([within, best], w, one_se=False)[0] == 1
    assert _choose([within, best], w, one_se=True)[0] == 0
    assert _choose([beyond, best], w, one_se=True)[0] == 1
    assert _choose([best, beyond], w, one_se=True)[0] == 0
    assert _choose([best, best.copy()], w, one_se=False)[0] == 0  # ties: the simpler
    # Weights count as repeated rows (numpy.average): weight only the first half.
    first_half = np.r_[np.ones(1000), np.zeros(1000)]
    better_first = np.r_[best[:1000] - 0.1, best[1000:] + 1.0]
    assert _choose([best, better_first], w, one_se=False)[0] == 0
    index, means = _choose([best, better_first], first_half, one_se=False)
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
