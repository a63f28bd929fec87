"""Base learners: the outcome, effect and propensity models the meta-learners combine."""

from __future__ import annotations

from typing import Any

import numpy as np
from sklearn.base import clone
from sklearn.compose import ColumnTransformer
from sklearn.ensemble import HistGradientBoostingClassifier, HistGradientBoostingRegressor
from sklearn.impute import SimpleImputer
from sklearn.linear_model import LogisticRegression, Ridge
from sklearn.pipeline import Pipeline, make_pipeline
from sklearn.preprocessing import OneHotEncoder, StandardScaler

from service.errors import DataError

__all__ = ["BASES", "GBM_DEFAULT", "make_model", "fit_model", "predict_mean"]

BASES = ("gbm", "linear")


# Shallow, regularised trees with early stopping on a held-out tenth: effect signals are
# small next to outcome noise, so variance is the main enemy. Used as given when a
# learner does not tune (``tune=False``) or has too few rows to tune.
GBM_DEFAULT: dict[str, Any] = {
    "learning_rate": 0.05,
    "max_iter": 300,
    "max_leaf_nodes": 15,
    "min_samples_leaf": 40,
    "l2_regularization": 1.0,
    "early_stopping": True,
    "validation_fraction": 0.1,
    "n_iter_no_change": 20,
}


def _gbm(
    classifier: bool, categorical: np.ndarray, seed: int, params: dict[str, Any] | None
) -> Any:
    params = {
        **GBM_DEFAULT,
        **(params or {}),
        "categorical_features": categorical if categorical.any() else None,
        "random_state": seed,
    }
    if classifier:
        return HistGradientBoostingClassifier(**params)
    return HistGradientBoostingRegressor(**params)


def _linear(classifier: bool, categorical: np.ndarray, params: dict[str, Any] | None) -> Any:
    numeric_cols = np.flatnonzero(~categorical)
    categorical_cols = np.flatnonzero(categorical)
    prepare = ColumnTransformer(
        [
            (
                "numeric",
                make_pipeline(
                    SimpleImputer(strategy="median", add_indicator=True), StandardScaler()
                ),
                numeric_cols,
            ),
            ("categorical", OneHotEncoder(handle_unknown="ignore"), categorical_cols),
        ]
    )
    penalty = dict(params or {})
    model = (
        LogisticRegression(max_iter=2000, C=penalty.get("C", 1.0))
        if classifier
        else Ridge(alpha=penalty.get("alpha", 1.0))
    )
    return Pipeline([("prepare", prepare), ("model", model)])


def make_model(
    base: Any,
    *,
    classifier: bool,
    categorical: np.ndarray,
    seed: int,
    params: dict[str, Any] | None = None,
) -> Any:
    """Build an unfitted outcome (``classifier=True`` for binary) or effect model.

    ``base`` is ``"gbm"`` (histogram gradient boosting), ``"linear"`` (logistic or ridge
    regression on imputed, scaled, one-hot features) or a scikit-learn estimator, which
    is cloned as given. ``params`` overrides the built-in bases' settings (boosting
    parameters; ``C`` or ``alpha`` for the linear models).
    """
    if isinstance(base, str):
        if base == "gbm":
            return _gbm(classifier, categorical, seed, params)
        if base == "linear":
            return _linear(classifier, categorical, params)
        raise DataError(f"base={base!r} is not one of {BASES}; pick one or pass an estimator.")
    return clone(base)


def fit_model(model: Any, X: np.ndarray, y: np.ndarray, w: np.ndarray) -> Any:
    """Fit with sample weights, routing them to the last step of a pipeline."""
    if isinstance(model, Pipeline):
        return model.fit(X, y, **{f"{model.steps[-1][0]}__sample_weight": w})
    return model.fit(X, y, sample_weight=w)


def predict_mean(model: Any, X: np.ndarray) -> np.ndarray:
    """Expected outcome: P(y = 1) for a classifier, the prediction for a regressor."""
    if hasattr(model, "predict_proba"):
        proba = model.predict_proba(X)
        classes = list(model.classes_)
        return np.asarray(proba[:, classes.index(1.0)] if 1.0 in classes else proba[:, -1])
    return np.asarray(model.predict(X), dtype=float)
