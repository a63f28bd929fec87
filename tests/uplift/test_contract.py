"""The scikit-learn contract and input checks, run against every registered learner."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from sklearn.base import clone

from service.errors import DataError, NotFittedError, OverlapWarning
from service.uplift import LEARNERS, BootstrapUplift, TLearner, make_learner
from service.uplift import __all__ as public_names

NAMES = sorted(LEARNERS)


def _campaign(n: int = 600, seed: int = 0, arms: tuple[str, ...] = ("mail",)) -> tuple:
    rng = np.random.default_rng(seed)
    X = pd.DataFrame(
        {
            "spend": rng.gamma(2.0, 10.0, n),
            "tenure": rng.integers(0, 60, n).astype(float),
            "plan": pd.Categorical(rng.choice(["basic", "plus", "max"], n)),
        }
    )
    X.loc[rng.random(n) < 0.1, "spend"] = np.nan
    X.loc[rng.random(n) < 0.05, "plan"] = np.nan
    treatment = rng.choice(np.array(["control", *arms], dtype=object), n)
    base = 0.2 + 0.1 * (X["plan"] == "plus").to_numpy()
    lift = np.where(treatment != "control", 0.2 * (X["tenure"].to_numpy() > 30), 0.0)
    y = (rng.random(n) < base + lift).astype(int)
    return X, y, treatment


def test_public_names_are_exported() -> None:
    import service.uplift as package

    assert all(hasattr(package, name) for name in public_names)


@pytest.mark.parametrize("name", NAMES)
def test_init_stores_parameters_untouched_and_clone_works(name: str) -> None:
    learner = make_learner(name, base="linear", random_state=3, arms=["mail"])
    copy = clone(learner)
    assert copy.get_params() == learner.get_params()
    assert learner.get_params()["arms"] == ["mail"]
    assert not [k for k in vars(learner) if k.endswith("_")]


@pytest.mark.parametrize("name", NAMES)
@pytest.mark.parametrize("base", ["gbm", "linear"])
def test_fit_returns_self_and_predicts_per_arm(name: str, base: str) -> None:
    X, y, t = _campaign(arms=("mail", "call"))
    learner = make_learner(name, base=base, random_state=0)
    assert learner.fit(X, y, t) is learner
    tau, mu0 = learner.predict_effects(X.iloc[:50])
    assert tau.shape == (50, 2) and mu0.shape == (50,)
    assert learner.arms_ == ["call", "mail"] and learner.control_ == "control"
    assert learner.outcome_type_ == "binary"
    assert np.isfinite(tau).all() and np.isfinite(mu0).all()
    np.testing.assert_allclose(learner.predict(X.iloc[:50]), tau)


@pytest.mark.parametrize("name", NAMES)
def test_random_state_makes_fits_repeatable(name: str) -> None:
    X, y, t = _campaign()
    first = make_learner(name, random_state=7).fit(X, y, t).predict(X)
    second = make_learner(name, random_state=7).fit(X, y, t).predict(X)
    np.testing.assert_array_equal(first, second)


def test_numpy_input_gets_generated_names() -> None:
    X, y, t = _campaign()
    learner = TLearner(base="linear").fit(X[["spend", "tenure"]].to_numpy(), y, t)
    assert list(learner.feature_names_in_) == ["x0", "x1"]
    assert learner.predict(np.zeros((3, 2))).shape == (3, 1)


def test_infinite_feature_value_is_refused_at_scoring() -> None:
    X, y, t = _campaign()
    learner = TLearner(base="linear").fit(X, y, t)
    with pytest.raises(DataError, match="'tenure' holds an infinite value"):
        learner.predict(X.iloc[:2].assign(tenure=[1.0, np.inf]))


def test_unseen_category_and_missing_values_are_scored() -> None:
    X, y, t = _campaign()
    learner = TLearner(random_state=0).fit(X, y, t)
    new = pd.DataFrame({"spend": [np.nan], "tenure": [12.0], "plan": ["unheard-of"]})
    assert np.isfinite(learner.predict(new)).all()


def test_predict_before_fit_is_refused() -> None:
    with pytest.raises(NotFittedError):
        TLearner().predict(np.zeros((2, 2)))


def test_missing_feature_column_is_named() -> None:
    X, y, t = _campaign()
    learner = TLearner(base="linear").fit(X, y, t)
    with pytest.raises(DataError, match=r"\['plan'\] are missing"):
        learner.predict(X.drop(columns="plan"))


def test_text_in_numeric_column_is_named() -> None:
    X, y, t = _campaign()
    learner = TLearner(base="linear").fit(X, y, t)
    bad = X.astype({"spend": object})
    bad.loc[0, "spend"] = "lots"
    with pytest.raises(DataError, match="'spend' is numeric in training but holds 'lots'"):
        learner.predict(bad)


@pytest.mark.parametrize(
    ("change", "message"),
    [
        ("few_rows", "Arm 'mail' has 5 row"),
        ("constant", "outcome is constant"),
        ("nan_treatment", "treatment is missing on 1 row"),
        ("nan_outcome", "outcome is missing or infinite on 1 row"),
        ("undeclared", r"do not match the declared arms \['sms'\]"),
        ("control_only", "Only the control label"),
        ("unknown_control", "control label 'holdout' does not occur"),
    ],
)
def test_bad_training_input_gets_a_clear_error(change: str, message: str) -> None:
    X, y, t = _campaign()
    y = y.astype(float)
    params: dict[str, object] = {"base": "linear"}
    if change == "few_rows":
        keep = np.concatenate([np.flatnonzero(t == "control"), np.flatnonzero(t == "mail")[:5]])
        X, y, t = X.iloc[keep], y[keep], t[keep]
    elif change == "constant":
        y[:] = 1.0
    elif change == "nan_treatment":
        t[3] = None
    elif change == "nan_outcome":
        y[3] = np.nan
    elif change == "undeclared":
        params["arms"] = ["sms"]
    elif change == "control_only":
        t[:] = "control"
    elif change == "unknown_control":
        params["control"] = "holdout"
    with pytest.raises(DataError, match=message):
        TLearner(**params).fit(X, y, t)


def test_control_label_must_be_named_when_it_cannot_be_guessed() -> None:
    X, y, t = _campaign()
    t = np.where(t == "control", "untouched", t)
    with pytest.raises(DataError, match="control=<label>"):
        TLearner().fit(X, y, t)
    assert TLearner(base="linear", control="untouched").fit(X, y, t).control_ == "untouched"


def test_poor_overlap_in_given_propensity_warns() -> None:
    X, y, t = _campaign()
    p = np.where(np.arange(len(y)) % 5 == 0, 0.01, 0.5)
    with pytest.warns(OverlapWarning, match="outside"):
        make_learner("dr", base="linear").fit(X, y, t, propensity=p)


def test_propensity_of_wrong_shape_is_refused() -> None:
    X, y, t = _campaign()
    with pytest.raises(DataError, match="propensity must have shape"):
        TLearner().fit(X, y, t, propensity=np.full((len(y), 3), 1 / 3))


def test_estimated_propensity_tracks_a_confounded_assignment() -> None:
    # Assignment depends on tenure; the cross-fitted logistic model should find it.
    X, y, _ = _campaign(n=2000)
    rng = np.random.default_rng(1)
    p_treat = 1 / (1 + np.exp(-(X["tenure"].to_numpy() - 30) / 10))
    t = np.where(rng.random(len(y)) < p_treat, "mail", "control")
    learner = make_learner("dr", base="linear", propensity="estimate", random_state=0)
    with pytest.warns(OverlapWarning):
        data = learner._prepare(X, y, t, None, None)
    assert np.corrcoef(data.propensity[:, 1], p_treat)[0, 1] > 0.95


def test_bootstrap_interval_contains_point_and_widens_with_confidence() -> None:
    X, y, t = _campaign(n=800)
    model = BootstrapUplift(TLearner(base="linear"), n_bootstrap=8, random_state=0)
    model.fit(X, y, t)
    tau, mu0, low90, high90 = model.predict_interval(X.iloc[:20], confidence=0.90)
    _, _, low99, high99 = model.predict_interval(X.iloc[:20], confidence=0.99)
    assert ((low90 <= tau) & (tau <= high90)).all()
    assert ((low99 <= low90) & (high90 <= high99)).all() and (high99 > low99).all()
    np.testing.assert_allclose(tau, model.predict(X.iloc[:20]))
    assert model.arms_ == ["mail"] and clone(model).get_params()["n_bootstrap"] == 8


def test_bootstrap_refuses_too_few_replicates() -> None:
    X, y, t = _campaign()
    with pytest.raises(DataError, match="n_bootstrap=1 must be an integer of at least 2"):
        BootstrapUplift(TLearner(), n_bootstrap=1).fit(X, y, t)


def test_sample_weight_equals_repeating_rows_for_the_linear_t_learner() -> None:
    X, y, t = _campaign()
    X = X[["spend", "tenure"]].fillna(0.0)
    w = np.random.default_rng(2).integers(1, 4, len(y))
    # Untuned: a held-out split of repeated rows differs from one of weighted rows.
    learner = TLearner(base="linear", tune=False)
    weighted = clone(learner).fit(X, y, t, sample_weight=w).predict(X)
    rows = np.repeat(np.arange(len(y)), w)
    repeated = clone(learner).fit(X.iloc[rows], y[rows], t[rows]).predict(X)
    # The scaler inside the linear base is fitted unweighted, so the ridge penalty acts on
    # slightly different scales: equal to 1e-3, not to rounding.
    np.testing.assert_allclose(weighted, repeated, atol=1e-3)
    unweighted = clone(learner).fit(X, y, t).predict(X)
    assert np.abs(weighted - unweighted).max() > 1e-2
