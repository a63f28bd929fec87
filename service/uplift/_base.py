"""Shared machinery of the uplift learners: input checks, encoding, prediction API."""

from __future__ import annotations

from typing import Any

import numpy as np
from sklearn.base import BaseEstimator
from sklearn.exceptions import NotFittedError as SklearnNotFitted
from sklearn.model_selection import StratifiedKFold
from sklearn.utils import check_random_state
from sklearn.utils.validation import check_is_fitted

from service.errors import DataError, NotFittedError
from service.uplift._bases import fit_model, make_model, predict_mean
from service.uplift._checks import (
    Arms,
    check_arms,
    check_outcome,
    check_propensity,
    check_weights,
    warn_overlap,
)
from service.uplift._features import FeatureEncoder, as_frame
from service.uplift._tuning import fit_tuned

__all__ = ["UpliftLearner", "FitData"]


class FitData:
    """Validated, encoded training data handed to a learner's ``_fit``."""

    def __init__(
        self,
        X: np.ndarray,
        y: np.ndarray,
        arms: Arms,
        propensity: np.ndarray,
        weights: np.ndarray,
        binary: bool,
        categorical: np.ndarray,
        rng: np.random.RandomState,
        tune: bool = False,
        choices: dict[str, dict[str, Any]] | None = None,
    ) -> None:
        self.X, self.y, self.t = X, y, arms.index
        self.arms = arms
        self.propensity = propensity
        self.w = weights
        self.binary = binary
        self.categorical = categorical
        self.rng = rng
        self.tune = tune
        # Settings chosen per nuisance role, shared with subsets (folds, replicates).
        self.choices: dict[str, dict[str, Any]] = {} if choices is None else choices

    def subset(self, rows: np.ndarray, rng: np.random.RandomState) -> FitData:
        """The same data restricted to ``rows`` (repeats allowed), with its own RNG."""
        arms = Arms(self.arms.control, self.arms.arms, self.t[rows])
        return FitData(
            self.X[rows],
            self.y[rows],
            arms,
            self.propensity[rows],
            self.w[rows],
            self.binary,
            self.categorical,
            rng,
            self.tune,
            self.choices,
        )

    @property
    def n_arms(self) -> int:
        return len(self.arms.arms)

    def seed(self) -> int:
        return int(self.rng.randint(np.iinfo(np.int32).max))

    def fit_role(
        self,
        role: str,
        base: Any,
        rows: np.ndarray,
        target: np.ndarray | None = None,
        *,
        classifier: bool | None = None,
        weight: np.ndarray | None = None,
        X: np.ndarray | None = None,
        categorical: np.ndarray | None = None,
    ) -> Any:
        """Fit the nuisance model of ``role`` on ``rows`` (the outcome unless ``target``
        is given, which has one value per row of ``rows``), tuned on its first fit.

        ``classifier`` defaults to a classifier for a binary outcome without ``target``
        (a ``target`` is tuned with the one-standard-error rule, see ``fit_tuned``);
        ``weight`` multiplies the sample weights; ``X`` and ``categorical`` replace the
        encoded features (the S-learner appends the arm).
        """
        features = self.X if X is None else X
        y = self.y[rows] if target is None else target
        w = self.w[rows] if weight is None else self.w[rows] * weight
        model, choice = fit_tuned(
            base,
            classifier=self.binary and target is None if classifier is None else classifier,
            categorical=self.categorical if categorical is None else categorical,
            seed=self.seed(),
            X=features[rows],
            y=y,
            w=w,
            choice=self.choices.get(role),
            tune=self.tune,
            observed=target is None,
        )
        if choice is not None:
            self.choices[role] = choice
        return model

    def folds(self, n_folds: int) -> list[tuple[np.ndarray, np.ndarray]]:
        """Folds stratified by arm (and outcome, when binary) for cross-fitting."""
        strata = self.t * 2 + (self.y > 0.5 if self.binary else 0)
        splitter = StratifiedKFold(n_folds, shuffle=True, random_state=self.seed())
        return list(splitter.split(self.X, strata))


class UpliftLearner(BaseEstimator):  # type: ignore[misc]
    """Base class: per-arm uplift ``tau_a(x)`` against control plus the control outcome.

    Subclasses implement ``_fit(data)`` and ``_predict(X) -> (tau, mu0)`` on encoded
    features; this class validates input and exposes the public prediction API.

    Parameters shared by every learner
    ----------------------------------
    base : {"gbm", "linear"} or estimator
        Base learner family; gradient-boosted trees by default.
    control : label, optional
        The treatment label of the untreated group (0, "0", "control" or "none" when
        omitted).
    arms : sequence of labels, optional
        Declared treatment arms; when given, the data must hold exactly these.
    outcome : {"auto", "binary", "continuous"}
    propensity : {"auto", "estimate"}
        ``"auto"``: the propensity passed to ``fit`` or, without one, the constant arm
        shares of a randomized campaign. ``"estimate"``: fit a logistic model of the
        assignment (cross-fitted) and warn when overlap is poor.
    min_arm_rows : int
        Refuse to fit when an arm has fewer rows.
    tune : bool, default True
        Choose each nuisance model's capacity (boosting: leaves, leaf size, number of
        trees; linear: the penalty) by held-out loss on the rows given to ``fit``; see
        ``service.uplift._tuning``. ``False`` keeps the fixed default settings.
    random_state : int, RandomState or None
    """

    _needs_propensity = False

    def __init__(
        self,
        *,
        base: Any = "gbm",
        control: Any = None,
        arms: Any = None,
        outcome: str = "auto",
        propensity: str = "auto",
        min_arm_rows: int = 20,
        tune: bool = True,
        random_state: Any = None,
    ) -> None:
        self.base = base
        self.control = control
        self.arms = arms
        self.outcome = outcome
        self.propensity = propensity
        self.min_arm_rows = min_arm_rows
        self.tune = tune
        self.random_state = random_state

    # -- fitting -----------------------------------------------------------------------

    def fit(
        self,
        X: Any,
        y: Any,
        treatment: Any,
        *,
        propensity: Any = None,
        sample_weight: Any = None,
    ) -> UpliftLearner:
        """Fit from a randomized (or logged) campaign.

        Parameters
        ----------
        X : DataFrame or array of shape (n, d)
        y : array of shape (n,)
            Binary response (0/1) or a continuous amount.
        treatment : array of shape (n,)
            The arm each row received; the control label marks the untreated.
        propensity : array of shape (n, 1 + n_arms) or (n,), optional
            Exact assignment probabilities per row (columns: control, then arms), for
            logged data; a vector is P(treated) with a single arm.
        sample_weight : array of shape (n,), optional

        Returns
        -------
        self
        """
        self._fit(self._prepare(X, y, treatment, propensity, sample_weight))
        return self

    def _prepare(
        self, X: Any, y: Any, treatment: Any, propensity: Any, sample_weight: Any
    ) -> FitData:
        if self.propensity not in ("auto", "estimate"):
            raise DataError(
                f"propensity={self.propensity!r} is not 'auto' or 'estimate'; pick one."
            )
        frame = as_frame(X)
        n = len(frame)
        self.encoder_ = FeatureEncoder.fit(frame)
        self.feature_names_in_ = np.array(self.encoder_.names, dtype=object)
        self.n_features_in_ = len(self.encoder_.names)
        arms = check_arms(treatment, self.control, self.arms, n, self.min_arm_rows)
        values, kind = check_outcome(y, n, self.outcome)
        weights = check_weights(sample_weight, n)
        self.control_, self.arms_, self.outcome_type_ = arms.control, list(arms.arms), kind
        encoded = self.encoder_.transform(frame)
        rng = check_random_state(self.random_state)
        p, given = check_propensity(propensity, arms, weights)
        data = FitData(
            encoded,
            values,
            arms,
            p,
            weights,
            kind == "binary",
            self.encoder_.categorical_mask,
            rng,
            tune=bool(self.tune),
        )
        # Filled in by ``_fit``: the settings chosen per nuisance role.
        self.tuning_ = data.choices
        if self.propensity == "estimate" and not given:
            data.propensity = self._estimate_propensity(data)
        return data

    def _estimate_propensity(self, data: FitData) -> np.ndarray:
        """Cross-fitted logistic assignment model (5 folds)."""
        p = np.empty_like(data.propensity)
        for train, test in data.folds(5):
            model = make_model("linear", classifier=True, categorical=data.categorical, seed=0)
            fit_model(model, data.X[train], data.t[train], data.w[train])
            cols = list(model.classes_)
            proba = model.predict_proba(data.X[test])
            p[test] = 1e-6
            for k in range(p.shape[1]):
                if k in cols:
                    p[test, k] = proba[:, cols.index(k)]
        p = np.clip(p, 1e-3, 1 - 1e-3)
        p /= p.sum(axis=1, keepdims=True)
        warn_overlap(p)
        return np.asarray(p)

    def _fit(self, data: FitData) -> None:
        raise NotImplementedError

    # -- prediction --------------------------------------------------------------------

    def _predict(self, X: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        raise NotImplementedError

    def _encode(self, X: Any) -> np.ndarray:
        try:
            check_is_fitted(self, "encoder_")
        except SklearnNotFitted as err:
            raise NotFittedError(
                f"This {type(self).__name__} is not fitted yet; call fit(X, y, treatment) first."
            ) from err
        encoded: np.ndarray = self.encoder_.transform(X)
        return encoded

    def predict_effects(self, X: Any) -> tuple[np.ndarray, np.ndarray]:
        """Return ``(tau, mu0)``: uplift per arm, shape (n, n_arms), and the expected
        outcome without contact, shape (n,), in one pass."""
        tau, mu0 = self._predict(self._encode(X))
        return tau, mu0

    def predict(self, X: Any) -> np.ndarray:
        """Uplift of each arm against control, shape (n, n_arms)."""
        return self.predict_effects(X)[0]

    def predict_control(self, X: Any) -> np.ndarray:
        """Expected outcome without contact, shape (n,)."""
        return self.predict_effects(X)[1]


def fit_outcome_models(
    data: FitData, base: Any, rows: np.ndarray | None = None, arms: int | None = None
) -> list[Any]:
    """Outcome models for arms ``0 .. arms - 1`` (index 0 = control; default: every arm),
    each fitted on its own rows among ``rows`` (default: all rows)."""
    rows = np.arange(len(data.y)) if rows is None else rows
    return [
        data.fit_role(f"outcome:{k}", base, rows[data.t[rows] == k])
        for k in range(data.n_arms + 1 if arms is None else arms)
    ]


def predict_outcomes(models: list[Any], X: np.ndarray) -> np.ndarray:
    """Expected outcome under each arm, shape (n, len(models))."""
    return np.column_stack([predict_mean(m, X) for m in models])


def cross_fitted_outcomes(data: FitData, base: Any, n_folds: int) -> np.ndarray:
    """Expected outcome under control and each arm, shape (n, 1 + n_arms), every row
    predicted by outcome models fitted on the other folds (cross-fitting)."""
    mu = np.empty((len(data.y), data.n_arms + 1))
    for train, test in data.folds(n_folds):
        mu[test] = predict_outcomes(fit_outcome_models(data, base, train), data.X[test])
    return mu
