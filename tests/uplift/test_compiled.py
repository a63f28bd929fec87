"""The compiled scoring path against scikit-learn's own prediction path.

Reference throughout: scikit-learn 1.9's predict / predict_proba of the very models the
learners fitted (through ``BootstrapUplift.predict_interval`` and the learners'
``_predict``), and ``FeatureEncoder.transform`` for row encoding.
"""

from __future__ import annotations

import copy
import pickle
from collections.abc import Iterator
from functools import cache
from typing import Any

import numpy as np
import pandas as pd
import pytest
from sklearn.linear_model import LinearRegression
from threadpoolctl import threadpool_limits

from service.errors import BundleError, DataError
from service.uplift import LEARNERS, BootstrapUplift, make_learner
from service.uplift.compiled import CompiledUplift, RowEncoder, compile_model

TOLERANCE = 1e-9  # float64 rounding of a different summation order, far below this

DESIGNS = {
    # one arm, binary outcome (classifier outcome models)
    "one_arm": {"n": 2000, "arms": ("mail",), "binary": True},
    # two arms, continuous outcome (regressor outcome models)
    "two_arms": {"n": 800, "arms": ("mail", "call"), "binary": False},
}


@pytest.fixture(autouse=True)
def _one_openmp_thread() -> Iterator[None]:
    # Boosting's OpenMP threads spin-wait; on a busy 2-core machine that makes fitting
    # and predicting many times slower than one thread.
    with threadpool_limits(1):
        yield


def _features(n: int, rng: np.random.Generator) -> pd.DataFrame:
    X = pd.DataFrame(
        {
            "spend": rng.gamma(2.0, 10.0, n),
            "tenure": rng.integers(0, 60, n).astype(float),
            "plan": rng.choice(np.array(["basic", "plus", "max", "gold"], dtype=object), n),
            "region": rng.choice(np.array(list("abcdef"), dtype=object), n),
            "paper_bill": rng.random(n) < 0.3,
        }
    )
    X.loc[rng.random(n) < 0.15, "spend"] = np.nan
    X.loc[rng.random(n) < 0.08, "plan"] = None
    return X


@cache
def _campaign(design: str) -> tuple[pd.DataFrame, np.ndarray, np.ndarray]:
    spec = DESIGNS[design]
    n, arms = int(spec["n"]), tuple(spec["arms"])
    rng = np.random.default_rng(7)
    X = _features(n, rng)
    t = rng.choice(np.array(["none", *arms], dtype=object), n)
    # A rare region seen only among a few control rows: every treated-arm model meets it
    # as an unknown category at prediction time.
    rare = np.flatnonzero(t == "none")[:4]
    X.loc[rare, "region"] = "z"
    tenure, spend = X["tenure"].to_numpy(), np.nan_to_num(X["spend"].to_numpy(), nan=20.0)
    lift = 0.15 * (tenure > 30) - 0.1 * X["region"].isin(["a", "c"]).to_numpy()
    treated = (t != "none").astype(float) * (1 + (t == "call"))
    base = 0.2 + 0.1 * (X["plan"] == "plus").to_numpy() + 0.004 * spend
    if spec["binary"]:
        y = (rng.random(n) < np.clip(base + treated * lift, 0, 1)).astype(float)
    else:
        y = 10 * (base + treated * lift) + rng.normal(0, 1, n)
    return X, y, t


@cache
def _fitted(name: str, base: str, design: str) -> BootstrapUplift:
    X, y, t = _campaign(design)
    options: dict[str, Any] = {"n_folds": 2} if name == "dr" else {}
    learner = make_learner(name, base=base, control="none", random_state=0, **options)
    with threadpool_limits(1):
        return BootstrapUplift(learner, n_bootstrap=3, random_state=0).fit(X, y, t)


def _scoring_frame(design: str) -> pd.DataFrame:
    """Fresh customers, with an unseen plan, missing values and out-of-range numbers."""
    X = _features(300, np.random.default_rng(99))
    X.loc[0:9, "plan"] = "platinum"
    X.loc[10:19, "region"] = None
    X.loc[20:29, "region"] = "z"
    X.loc[30:39, "tenure"] = np.nan
    X.loc[40:44, "spend"] = [-500.0, 5000.0, 1e6, 0.0, 1e-300]
    X.loc[45:49, ["spend", "tenure", "plan", "region"]] = [np.nan, np.nan, None, None]
    return X


def _assert_close(got: tuple[Any, ...], expected: tuple[Any, ...]) -> None:
    for a, b in zip(got, expected, strict=True):
        np.testing.assert_allclose(a, b, rtol=0, atol=TOLERANCE)


@pytest.mark.parametrize("design", sorted(DESIGNS))
@pytest.mark.parametrize("base", ["gbm", "linear"])
@pytest.mark.parametrize("name", sorted(LEARNERS))
def test_compiled_scores_equal_scikit_learn(name: str, base: str, design: str) -> None:
    model = _fitted(name, base, design)
    compiled = compile_model(model)
    X = _scoring_frame(design)
    expected = model.predict_interval(X, confidence=0.9)
    _assert_close(compiled.predict_interval(X, confidence=0.9), expected)
    _assert_close(compiled.predict_interval(model.encoder_.transform(X), 0.9), expected)
    for i in (0, 12, 25, 33, 41, 47, 100):
        tau, mu0, low, high = compiled.predict_row(X.iloc[i].to_dict(), confidence=0.9)
        assert tau.shape == (len(model.arms_),) and isinstance(mu0, float)
        _assert_close((tau, mu0, low, high), tuple(e[i] for e in expected))


@pytest.mark.parametrize("base", ["gbm", "linear"])
def test_bare_learner_compiles_without_interval(base: str) -> None:
    learner = _fitted("t", base, "two_arms").estimator_
    compiled = compile_model(learner)
    X = _scoring_frame("two_arms")
    tau, mu0, low, high = compiled.predict_interval(X)
    expected_tau, expected_mu0 = learner.predict_effects(X)
    _assert_close((tau, mu0), (expected_tau, expected_mu0))
    assert compiled.n_bootstrap_ == 0 and np.isnan(low).all() and np.isnan(high).all()


@pytest.mark.parametrize("base", ["gbm", "linear"])
def test_codes_outside_the_categories_route_as_unknown(base: str) -> None:
    # scikit-learn's ordinal and one-hot encoders treat a code they never saw as an
    # unknown category: trees send it the missing-value way, one-hot gives all zeros.
    model = _fitted("s", base, "one_arm")
    encoded = model.encoder_.transform(_scoring_frame("one_arm").iloc[:8])
    plan, region = model.encoder_.names.index("plan"), model.encoder_.names.index("region")
    encoded[:, plan] = [2.5, -1.0, 300.0, 1e9, -0.0, 3.0, np.nan, 255.0]
    encoded[:, region] = [0.0, 0.5, 7.0, -3.0, np.nan, 6.0, 1.0, 1e-9]
    expected = model.estimator_._predict(encoded)
    tau, mu0, _, _ = compile_model(model).predict_interval(encoded)
    _assert_close((tau, mu0), expected)


def test_threads_split_a_batch_without_changing_it() -> None:
    compiled = compile_model(_fitted("dr", "gbm", "two_arms"))
    X = compiled.encoder_.transform(_scoring_frame("two_arms"))
    single = compiled.predict_interval(X, n_threads=1)
    _assert_close(compiled.predict_interval(X, n_threads=3), single)


def test_compiled_model_pickles() -> None:
    compiled = compile_model(_fitted("x", "gbm", "one_arm"))
    copy = pickle.loads(pickle.dumps(compiled))
    X = _scoring_frame("one_arm")
    _assert_close(copy.predict_interval(X), compiled.predict_interval(X))


@pytest.mark.parametrize(
    "row",
    [
        {"spend": 12.5, "tenure": 3, "plan": "plus", "region": "b", "paper_bill": True},
        {"spend": None, "tenure": np.nan, "plan": None, "region": float("nan"),
         "paper_bill": None},
        {"spend": np.float32(0.1), "tenure": np.int64(7), "plan": "nope", "region": "a",
         "paper_bill": np.True_},
        {"spend": True, "tenure": -4, "plan": np.str_("max"), "region": 3, "paper_bill": False},
        {"spend": "4.25", "tenure": "", "plan": "gold", "region": "c", "paper_bill": "True"},
        {"spend": 2**70, "tenure": 1e308, "plan": 1.5, "region": pd.NA, "paper_bill": 1},
        {"spend": pd.NA, "tenure": float("inf"), "plan": "basic", "region": "f",
         "paper_bill": "False", "not_a_feature": "ignored"},
    ],
)  # fmt: skip
def test_row_encoder_equals_encoder_transform(row: dict[str, Any]) -> None:
    encoder = _fitted("t", "linear", "one_arm").encoder_
    frame = pd.DataFrame([row])
    try:
        expected = encoder.transform(frame)[0]
    except DataError:
        with pytest.raises(DataError):
            RowEncoder(encoder).encode(row)
        return
    np.testing.assert_array_equal(RowEncoder(encoder).encode(row), expected)


def test_row_encoder_names_a_missing_feature() -> None:
    encoder = _fitted("t", "linear", "one_arm").encoder_
    with pytest.raises(DataError, match=r"\['region'\] are missing"):
        RowEncoder(encoder).encode({"spend": 1.0, "tenure": 2, "plan": "max", "paper_bill": 0})


def test_wrong_inputs_are_refused() -> None:
    compiled = compile_model(_fitted("t", "linear", "one_arm"))
    with pytest.raises(DataError, match="confidence=1.5"):
        compiled.predict_row(np.zeros(5), confidence=1.5)
    with pytest.raises(DataError, match=r"shape \(n, 5\)"):
        compiled.predict_interval(np.zeros((3, 4)))
    with pytest.raises(DataError, match=r"shape \(5,\)"):
        compiled.predict_row(np.zeros(6))


def test_only_known_models_compile() -> None:
    X, y, t = _campaign("one_arm")
    custom = make_learner("t", base=LinearRegression(), control="none").fit(
        X.drop(columns=["plan", "region", "paper_bill"]).fillna(0.0), y, t
    )
    with pytest.raises(BundleError, match="Cannot compile the inner model LinearRegression"):
        compile_model(custom)
    with pytest.raises(BundleError, match="needs a fitted BootstrapUplift"):
        compile_model(LinearRegression())  # type: ignore[arg-type]
    assert isinstance(compile_model(_fitted("t", "linear", "one_arm")), CompiledUplift)


def test_trees_stored_in_another_node_order_still_match() -> None:
    # scikit-learn stores each tree depth-first (left child next); the compiler relies on
    # that layout and re-lays a tree that differs. Shuffle one tree's nodes (root kept
    # first): scikit-learn follows the child indices, so its predictions do not change.
    model = copy.deepcopy(_fitted("t", "gbm", "one_arm"))
    predictor = max(
        (p for it in model.estimator_.models_[1]._predictors for p in it),
        key=lambda p: len(p.nodes),
    )
    nodes = predictor.nodes
    order = np.concatenate([[0], np.random.default_rng(0).permutation(len(nodes) - 1) + 1])
    position = np.empty(len(nodes), dtype=np.int64)
    position[order] = np.arange(len(nodes))
    shuffled = nodes[order].copy()
    for child in ("left", "right"):
        shuffled[child] = position[shuffled[child]]
    predictor.nodes = shuffled
    X = _scoring_frame("one_arm")
    _assert_close(compile_model(model).predict_interval(X), model.predict_interval(X))
