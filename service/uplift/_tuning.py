"""Capacity of the base models, chosen by held-out loss on each nuisance target.

A learner fits several *nuisance* models (outcome models per arm, effect models on
pseudo-outcomes, ...). With tuning on, the first fit of each role inside one learner
fit compares a few settings on a held-out fifth of that fit's own rows (never on rows
the learner was not given, so out-of-fold metrics stay out of fold), keeps the best
(for a constructed effect target, the simplest within one standard error of the best),
and refits it on all the rows. Later fits of the same role (the other cross-fitting
folds, the bootstrap replicates) reuse the choice, which keeps the cost bounded.
"""

from __future__ import annotations

from typing import Any

import numpy as np
from sklearn.model_selection import train_test_split

from service.uplift._bases import fit_model, make_model, predict_mean

__all__ = ["GBM_GRID", "LINEAR_GRID", "fit_tuned"]

# Three capacities around the fixed default (15 leaves of >= 40 rows): smooth, medium,
# flexible. A learning rate of 0.1 with early stopping needs about half the trees of the
# default's 0.05, so a search of three costs little more than one default fit.
GBM_GRID: tuple[dict[str, Any], ...] = (
    {"max_leaf_nodes": 4, "min_samples_leaf": 100},
    {"max_leaf_nodes": 15, "min_samples_leaf": 40},
    {"max_leaf_nodes": 31, "min_samples_leaf": 20},
)
_GBM_SEARCH: dict[str, Any] = {
    "learning_rate": 0.1,
    "max_iter": 500,
    "l2_regularization": 1.0,
    "early_stopping": True,
    "n_iter_no_change": 20,
}
# Inverse penalty of the logistic model, penalty of the ridge model.
LINEAR_GRID: dict[bool, tuple[dict[str, Any], ...]] = {
    True: ({"C": 0.01}, {"C": 0.1}, {"C": 1.0}, {"C": 10.0}),
    False: ({"alpha": 100.0}, {"alpha": 10.0}, {"alpha": 1.0}, {"alpha": 0.1}),
}
_HELD_OUT = 0.2
# Common practice, no source: below a few hundred rows a fifth held out is too small to
# tell settings apart, so the default settings are used.
MIN_TUNING_ROWS = 250


def _split(y: np.ndarray, classifier: bool, seed: int) -> tuple[np.ndarray, np.ndarray]:
    rows = np.arange(len(y))
    stratify = y if classifier and np.bincount(y.astype(int)).min() >= 5 else None
    fit_rows, held_out = train_test_split(
        rows, test_size=_HELD_OUT, random_state=seed, stratify=stratify
    )
    return np.asarray(fit_rows), np.asarray(held_out)


def _row_loss(y: np.ndarray, pred: np.ndarray, classifier: bool) -> np.ndarray:
    if classifier:
        p = np.clip(pred, 1e-12, 1 - 1e-12)
        return np.asarray(-(y * np.log(p) + (1 - y) * np.log(1 - p)))
    return np.asarray((y - pred) ** 2)


def _choose(losses: list[np.ndarray], w: np.ndarray, one_se: bool) -> tuple[int, list[float]]:
    """The index of the kept candidate and every candidate's weighted mean held-out loss.

    Kept: the smallest loss (the first on ties; grids run from simple to flexible) or,
    with ``one_se``, the simplest candidate within one standard error of it, the error
    taken on the row-by-row differences (the candidates share the held-out rows).
    """
    means = [float(np.average(loss, weights=w)) for loss in losses]
    best = int(np.argmin(means))
    if not one_se:
        return best, means
    share = w / w.sum()
    n_eff = 1.0 / float(share @ share)  # Kish's effective sample size
    for k, loss in enumerate(losses[:best]):
        gap = loss - losses[best]
        mean = float(share @ gap)
        se = float(np.sqrt(share @ (gap - mean) ** 2 / n_eff))
        if mean <= se:
            return k, means
    return best, means


def _search_gbm(
    classifier: bool, categorical: np.ndarray, seed: int, X: np.ndarray, y: np.ndarray,
    w: np.ndarray, one_se: bool,
) -> dict[str, Any]:  # fmt: skip
    fit_rows, held_out = _split(y, classifier, seed)
    iterations, rows = [], []
    for params in GBM_GRID:
        model = make_model(
            "gbm",
            classifier=classifier,
            categorical=categorical,
            seed=seed,
            params={**_GBM_SEARCH, **params},
        )
        model.fit(
            X[fit_rows],
            y[fit_rows],
            sample_weight=w[fit_rows],
            X_val=X[held_out],
            y_val=y[held_out],
            sample_weight_val=w[held_out],
        )
        # validation_score_[i] is minus the held-out loss after i iterations.
        iterations.append(max(int(np.argmax(model.validation_score_)), 1))
        rows.append(_row_loss(y[held_out], predict_mean(model, X[held_out]), classifier))
    k, losses = _choose(rows, w[held_out], one_se)
    params = {
        **_GBM_SEARCH,
        **GBM_GRID[k],
        "max_iter": iterations[k],
        "early_stopping": False,
    }
    return {"params": params, "losses": losses}


def _search_linear(
    classifier: bool, categorical: np.ndarray, X: np.ndarray, y: np.ndarray, w: np.ndarray,
    seed: int, one_se: bool,
) -> dict[str, Any]:  # fmt: skip
    fit_rows, held_out = _split(y, classifier, seed)
    rows = []
    for params in LINEAR_GRID[classifier]:
        model = make_model(
            "linear", classifier=classifier, categorical=categorical, seed=seed, params=params
        )
        fit_model(model, X[fit_rows], y[fit_rows], w[fit_rows])
        rows.append(_row_loss(y[held_out], predict_mean(model, X[held_out]), classifier))
    k, losses = _choose(rows, w[held_out], one_se)
    return {"params": dict(LINEAR_GRID[classifier][k]), "losses": losses}


def fit_tuned(
    base: Any,
    *,
    classifier: bool,
    categorical: np.ndarray,
    seed: int,
    X: np.ndarray,
    y: np.ndarray,
    w: np.ndarray,
    choice: dict[str, Any] | None,
    tune: bool,
    observed: bool = True,
) -> tuple[Any, dict[str, Any] | None]:
    """Fit one nuisance model; return it and the choice made (None if none was made).

    ``choice`` (from an earlier fit of the same role) is reused as given. Otherwise,
    when ``tune`` is on, ``base`` is built in and there are enough rows, the settings
    of :data:`GBM_GRID` (boosting, with the number of trees found by early stopping)
    or :data:`LINEAR_GRID` (the penalty) are compared by weighted held-out loss (log
    loss for a classifier, squared error otherwise). When the target is the
    ``observed`` outcome, the setting with the smallest loss is refitted on all rows.
    A constructed target (an imputed effect, a doubly robust or transformed
    pseudo-outcome, the R-learner's residual ratio) is so noisy that its held-out loss
    tells settings apart poorly, so there the simplest setting within one standard error
    of the best is kept: the smoother of two settings the held-out rows cannot tell
    apart is the safer one. (Measured in ``bench/quality.py`` on ``groups_two_arms``:
    the smallest loss for every model raised the X-learner from 0.891 to 0.897 of the
    oracle's Qini and dropped the DR-learner from 0.878 to 0.826; this split keeps
    0.897 and 0.879.)

    References
    ----------
    Hastie, T., Tibshirani, R. & Friedman, J. (2009). The Elements of Statistical
    Learning, 2nd ed., Springer, sec. 7.2 and 7.10 (choosing model complexity by the
    smallest held-out error; the one-standard-error rule).
    Breiman, L., Friedman, J., Olshen, R. & Stone, C. (1984). Classification and
    Regression Trees. Wadsworth (the one-standard-error rule).
    """
    searchable = isinstance(base, str) and tune and len(y) >= MIN_TUNING_ROWS
    if choice is None and searchable:
        if base == "gbm":
            choice = _search_gbm(classifier, categorical, seed, X, y, w, not observed)
        elif base == "linear":
            choice = _search_linear(classifier, categorical, X, y, w, seed, not observed)
    params = None if choice is None else choice["params"]
    model = make_model(
        base, classifier=classifier, categorical=categorical, seed=seed, params=params
    )
    return fit_model(model, X, y, w), choice
