"""Learner selection by cross-validated, out-of-fold Qini.

Every figure here is measured on rows the scoring model never saw: each fold's model
predicts only its held-out rows, and the pooled out-of-fold predictions are evaluated
once. Folds are stratified by arm and outcome so every fold holds every arm.
"""

from __future__ import annotations

from collections.abc import Callable, Mapping
from dataclasses import dataclass, field
from typing import Any

import numpy as np
import pandas as pd
from scipy.stats import t as student_t
from sklearn.base import clone
from sklearn.model_selection import StratifiedKFold

from service.errors import DataError
from service.evaluation.areas import qini_coefficient
from service.evaluation.report import evaluate_uplift
from service.uplift import TLearner, UpliftLearner
from service.uplift._features import as_frame

__all__ = [
    "CrossValidated",
    "SelectionResult",
    "cross_validated_uplift",
    "r_loss",
    "select_learner",
]


@dataclass(frozen=True)
class CrossValidated:
    """Out-of-fold predictions of one learner and the metrics measured on them.

    ``oof`` has shape (n, n_arms) and ``oof_control`` (the expected outcome without
    contact) shape (n,); ``fold`` gives each row's fold; ``metrics`` is
    :func:`~service.evaluation.evaluate_uplift` on the pooled out-of-fold scores;
    ``fold_qini`` holds the normalised Qini of each fold (rows: folds, columns: arms)
    and ``qini_interval`` a t-interval over folds of their mean across arms.
    ``importance`` (when asked for) is the out-of-fold permutation importance of each
    feature on the uplift score (see :func:`cross_validated_uplift`).

    References
    ----------
    Radcliffe, N. J. (2007). Using control groups to target on predicted lift. Direct
    Marketing Analytics Journal, 1, 14-21.
    """

    arms: list[Any]
    control: Any
    oof: np.ndarray
    fold: np.ndarray
    metrics: dict[str, dict[str, Any]]
    fold_qini: np.ndarray
    qini_interval: tuple[float, float, float] = field(default=(np.nan, np.nan, np.nan))
    importance: dict[str, dict[str, float]] | None = None
    oof_control: np.ndarray | None = None

    @property
    def score(self) -> float:
        """Mean over arms of the pooled out-of-fold normalised Qini (the selection key)."""
        values = [m["qini_normalized"] for m in self.metrics.values()]
        return float(np.mean([float(v) if v is not None else -np.inf for v in values]))


@dataclass(frozen=True)
class SelectionResult:
    """The winning learner's name, every candidate's score (out-of-fold Qini), its
    out-of-fold results and R-loss (see :func:`select_learner`).

    References
    ----------
    Radcliffe, N. J. (2007). Using control groups to target on predicted lift. Direct
    Marketing Analytics Journal, 1, 14-21.
    """

    best: str
    scores: dict[str, float]
    results: dict[str, CrossValidated]
    r_losses: dict[str, float] = field(default_factory=dict)


def _strata(y: np.ndarray, treatment: np.ndarray) -> np.ndarray:
    labels = pd.Series(treatment.astype(str))
    distinct = np.unique(y)
    if len(distinct) <= 2:
        outcome = (y == distinct.max()).astype(int)
    else:
        outcome = pd.qcut(y, 4, labels=False, duplicates="drop")
    return (labels + "|" + pd.Series(outcome).astype(str)).to_numpy()


def _subset(values: Any, rows: np.ndarray) -> Any:
    return None if values is None else np.asarray(values)[rows]


def cross_validated_uplift(
    learner: UpliftLearner,
    X: Any,
    y: Any,
    treatment: Any,
    *,
    propensity: Any = None,
    sample_weight: Any = None,
    n_splits: int = 5,
    random_state: int = 0,
    on_fold: Callable[[int], None] | None = None,
    importance: bool = False,
) -> CrossValidated:
    """Fit ``learner`` on ``n_splits - 1`` folds at a time and predict the held-out fold.

    Parameters
    ----------
    learner : UpliftLearner
        Unfitted template; cloned per fold.
    X, y, treatment, propensity, sample_weight
        As for :meth:`UpliftLearner.fit`. Weights also weight the evaluation.
    n_splits : int
        Number of folds, stratified by arm and outcome (outcome quartiles when
        continuous).
    random_state : int
        Seeds the fold assignment.
    on_fold : callable, optional
        Called with the fold number after each fold (for progress bars).
    importance : bool, default False
        Also measure each feature's permutation importance on the uplift score, out of
        fold: each fold's model scores its held-out rows again with one feature's values
        shuffled among them; ``score_change`` is the mean absolute change of the
        predicted uplift and ``qini_drop`` the fall of the pooled normalised Qini (both
        averaged over arms).

    Returns
    -------
    CrossValidated

    References
    ----------
    Radcliffe, N. J. (2007). Using control groups to target on predicted lift. Direct
    Marketing Analytics Journal, 1, 14-21.
    Breiman, L. (2001). Random forests. Machine Learning 45(1), 5-32 (permutation
    importance).
    """
    frame = as_frame(X)
    y_arr = np.asarray(y, dtype=float)
    t_arr = np.asarray(treatment, dtype=object)
    if len(frame) != len(y_arr) or len(frame) != len(t_arr):
        raise DataError(
            f"X has {len(frame)} rows, y {len(y_arr)} and treatment {len(t_arr)}; pass one "
            "value per row in each."
        )
    splitter = StratifiedKFold(n_splits, shuffle=True, random_state=random_state)
    fold = np.empty(len(frame), dtype=int)
    oof: np.ndarray | None = None
    oof_control = np.empty(len(frame))
    permuted: dict[str, np.ndarray] = {}
    rng = np.random.default_rng(random_state)
    arms: list[Any] = []
    control: Any = None
    for k, (train, test) in enumerate(splitter.split(frame, _strata(y_arr, t_arr))):
        model = clone(learner).fit(
            frame.iloc[train],
            y_arr[train],
            t_arr[train],
            propensity=_subset(propensity, train),
            sample_weight=_subset(sample_weight, train),
        )
        if oof is None:
            arms, control = list(model.arms_), model.control_
            oof = np.empty((len(frame), len(arms)))
        oof[test], oof_control[test] = model.predict_effects(frame.iloc[test])
        if importance:
            for name in frame.columns:
                shuffled = frame.iloc[test].copy()
                shuffled[name] = shuffled[name].to_numpy()[rng.permutation(len(test))]
                permuted.setdefault(str(name), np.empty_like(oof))[test] = model.predict(shuffled)
        fold[test] = k
        if on_fold is not None:
            on_fold(k)
    assert oof is not None
    metrics = evaluate_uplift(y_arr, t_arr, oof, arms, control, sample_weight=sample_weight)
    fold_qini = _fold_qini(y_arr, t_arr, oof, fold, arms, control, sample_weight)
    ranks = (
        _importance(y_arr, t_arr, oof, permuted, arms, control, sample_weight)
        if importance
        else None
    )
    return CrossValidated(
        arms, control, oof, fold, metrics, fold_qini, _t_interval(fold_qini), ranks, oof_control
    )


def _importance(
    y: np.ndarray,
    t: np.ndarray,
    oof: np.ndarray,
    permuted: dict[str, np.ndarray],
    arms: list[Any],
    control: Any,
    sample_weight: Any,
) -> dict[str, dict[str, float]]:
    def qini(score: np.ndarray) -> float:
        values = [
            qini_coefficient(
                y, t, score[:, j], sample_weight=sample_weight, control=control, arm=arm
            )
            for j, arm in enumerate(arms)
        ]
        return float(np.mean(values))

    base = qini(oof)
    out = {
        name: {
            "score_change": float(np.mean(np.abs(scores - oof))),
            "qini_drop": base - qini(scores),
        }
        for name, scores in permuted.items()
    }
    return dict(sorted(out.items(), key=lambda item: -item[1]["score_change"]))


def _fold_qini(
    y: np.ndarray,
    t: np.ndarray,
    oof: np.ndarray,
    fold: np.ndarray,
    arms: list[Any],
    control: Any,
    sample_weight: Any,
) -> np.ndarray:
    w = None if sample_weight is None else np.asarray(sample_weight, dtype=float)
    out = np.full((fold.max() + 1, len(arms)), np.nan)
    for k in range(fold.max() + 1):
        rows = fold == k
        for j, arm in enumerate(arms):
            try:
                out[k, j] = qini_coefficient(
                    y[rows],
                    t[rows],
                    oof[rows, j],
                    sample_weight=None if w is None else w[rows],
                    control=control,
                    arm=arm,
                )
            except DataError:
                continue  # a fold without outcome variation has no defined Qini
    return out


def _t_interval(fold_qini: np.ndarray, confidence: float = 0.95) -> tuple[float, float, float]:
    per_fold = np.nanmean(fold_qini, axis=1)
    per_fold = per_fold[np.isfinite(per_fold)]
    if len(per_fold) < 2:
        return (np.nan, np.nan, np.nan)
    mean = float(per_fold.mean())
    half = float(
        student_t.ppf(0.5 + confidence / 2, len(per_fold) - 1)
        * per_fold.std(ddof=1)
        / np.sqrt(len(per_fold))
    )
    return (mean, mean - half, mean + half)


def r_loss(
    y: np.ndarray,
    arm_index: np.ndarray,
    tau: np.ndarray,
    mu: np.ndarray,
    propensity: np.ndarray,
    sample_weight: np.ndarray | None = None,
) -> np.ndarray:
    """The R-loss of each arm's effect estimate against control, shape (n_arms,).

    For arm ``a``, over the rows of control and ``a``, with ``e`` the probability of
    ``a`` within the pair and ``m = (1 - e) mu_0 + e mu_a`` the pair's outcome mean: the
    weighted mean of ``(y - m - (1[t=a] - e) tau_a)^2``. Its expectation is smallest at
    the true effect whatever the outcome model's error, so it compares effect
    estimates without knowing the effect (the nuisances ``mu`` and the estimates
    ``tau`` should both be out of fold).

    Parameters
    ----------
    y : array of shape (n,)
    arm_index : array of shape (n,)
        0 for control, ``a`` for the a-th arm.
    tau : array of shape (n, n_arms)
    mu : array of shape (n, 1 + n_arms)
        Expected outcome under control and each arm.
    propensity : array of shape (n, 1 + n_arms)
    sample_weight : array of shape (n,), optional

    References
    ----------
    Nie, X. & Wager, S. (2021). Quasi-oracle estimation of heterogeneous treatment
    effects. Biometrika 108(2), 299-319.
    Robinson, P. M. (1988). Root-N-consistent semiparametric regression. Econometrica
    56(4), 931-954.
    """
    squared, weight = _r_loss_rows(y, arm_index, tau, mu, propensity, sample_weight)
    return np.asarray((squared * weight).sum(axis=0) / weight.sum(axis=0))


def _r_loss_rows(
    y: np.ndarray,
    arm_index: np.ndarray,
    tau: np.ndarray,
    mu: np.ndarray,
    propensity: np.ndarray,
    sample_weight: np.ndarray | None,
) -> tuple[np.ndarray, np.ndarray]:
    """Each row's squared R-residual per arm and its weight (0 outside the arm's pair)."""
    w = np.ones(len(y)) if sample_weight is None else np.asarray(sample_weight, dtype=float)
    squared = np.zeros_like(tau, dtype=float)
    weight = np.zeros_like(tau, dtype=float)
    for a in range(1, tau.shape[1] + 1):
        rows = (arm_index == 0) | (arm_index == a)
        e = propensity[rows, a] / (propensity[rows, a] + propensity[rows, 0])
        m = (1 - e) * mu[rows, 0] + e * mu[rows, a]
        residual = y[rows] - m - ((arm_index[rows] == a) - e) * tau[rows, a - 1]
        squared[rows, a - 1] = residual**2
        weight[rows, a - 1] = w[rows]
    return squared, weight


def _named(on_fold: Callable[[str, int], None] | None, name: str) -> Callable[[int], None] | None:
    if on_fold is None:
        return None
    return lambda k: on_fold(name, k)


def select_learner(
    candidates: Mapping[str, UpliftLearner],
    X: Any,
    y: Any,
    treatment: Any,
    *,
    propensity: Any = None,
    sample_weight: Any = None,
    n_splits: int = 5,
    random_state: int = 0,
    on_fold: Callable[[str, int], None] | None = None,
    importance: bool = False,
) -> SelectionResult:
    """Cross-validate every candidate on the same folds and pick one.

    The winner has the best pooled out-of-fold normalised Qini (mean over arms; ties go
    to the first candidate listed) among the candidates whose out-of-fold R-loss (mean
    over arms, see :func:`r_loss`) is within one standard error of the smallest. The
    Qini only scores the ranking; the screen drops a candidate whose effect estimates
    are clearly worse, which a ranking can hide (with a constant true effect every
    ranking is noise). The R-loss's outcome models are the out-of-fold fits of the
    first T-learner among the candidates (or of one with the first candidate's
    settings); its propensities are ``propensity`` or, without one, the arm shares.

    References
    ----------
    Radcliffe, N. J. (2007). Using control groups to target on predicted lift. Direct
    Marketing Analytics Journal, 1, 14-21.
    Nie, X. & Wager, S. (2021). Quasi-oracle estimation of heterogeneous treatment
    effects. Biometrika 108(2), 299-319 (the R-loss).
    Schuler, A., Baiocchi, M., Tibshirani, R. & Shah, N. (2018). A comparison of methods
    for model selection when estimating individual treatment effects. arXiv:1804.05146.
    Hastie, T., Tibshirani, R. & Friedman, J. (2009). The Elements of Statistical
    Learning, 2nd ed., Springer, sec. 7.10 (the one-standard-error rule).
    """
    if not candidates:
        raise DataError("No candidate learners were given; pass at least one.")

    def fit(learner: UpliftLearner, **options: Any) -> CrossValidated:
        # Every fit, candidates' and the nuisance's, on the same folds.
        return cross_validated_uplift(
            learner, X, y, treatment, propensity=propensity, sample_weight=sample_weight,
            n_splits=n_splits, random_state=random_state, **options,
        )  # fmt: skip

    results = {
        name: fit(learner, on_fold=_named(on_fold, name), importance=importance)
        for name, learner in candidates.items()
    }
    scores = {name: r.score for name, r in results.items()}
    nuisance = _nuisance(candidates, results, fit)
    y_arr, t_arr = np.asarray(y, dtype=float), np.asarray(treatment, dtype=object)
    terms = {
        name: _r_loss_terms(r, nuisance, y_arr, t_arr, propensity, sample_weight)
        for name, r in results.items()
    }
    r_losses = {name: float(values.sum()) for name, values in terms.items()}
    lowest = min(r_losses, key=lambda name: r_losses[name])

    def within_one_se(name: str) -> bool:
        # The terms are per row, so the sum's standard error is sqrt(n) times their SD.
        gap = terms[name] - terms[lowest]
        return float(gap.sum()) <= float(np.sqrt(len(gap)) * gap.std())

    eligible = [name for name in scores if within_one_se(name)]
    best = max(eligible, key=lambda name: (scores[name], -list(scores).index(name)))
    return SelectionResult(best, scores, results, r_losses)


def _nuisance(
    candidates: Mapping[str, UpliftLearner],
    results: Mapping[str, CrossValidated],
    fit: Callable[[UpliftLearner], CrossValidated],
) -> CrossValidated:
    """Out-of-fold outcome models for the R-loss: the first T-learner among the
    candidates or, without one, a T-learner with the first candidate's settings."""
    for name, learner in candidates.items():
        if isinstance(learner, TLearner):
            return results[name]
    first = next(iter(candidates.values())).get_params()
    own = TLearner().get_params()
    return fit(TLearner(**{key: value for key, value in first.items() if key in own}))


def _r_loss_terms(
    cv: CrossValidated,
    nuisance: CrossValidated,
    y: np.ndarray,
    treatment: np.ndarray,
    propensity: Any,
    sample_weight: Any,
) -> np.ndarray:
    """Each row's share of the mean over arms of :func:`r_loss` of ``cv``'s out-of-fold
    effects (the terms sum to it), with ``nuisance``'s out-of-fold outcome models."""
    labels = [cv.control, *cv.arms]
    lookup = {label: k for k, label in enumerate(labels)}
    arm_index = np.array([lookup[label] for label in treatment])
    w = np.ones(len(y)) if sample_weight is None else np.asarray(sample_weight, dtype=float)
    if propensity is None:
        shares = np.bincount(arm_index, weights=w, minlength=len(labels)) / w.sum()
        p = np.tile(shares, (len(y), 1))
    else:
        p = np.asarray(propensity, dtype=float)
        p = np.column_stack([1.0 - p, p]) if p.ndim == 1 else p
    assert nuisance.oof_control is not None
    order = [nuisance.arms.index(arm) for arm in cv.arms]
    mu0 = nuisance.oof_control[:, None]
    mu = np.hstack([mu0, mu0 + nuisance.oof[:, order]])
    squared, weight = _r_loss_rows(y, arm_index, cv.oof, mu, p, w)
    return np.asarray((squared * weight / weight.sum(axis=0)).sum(axis=1) / len(cv.arms))
