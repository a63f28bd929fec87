"""R-learner (residual-on-residual effect regression) with cross-fitting."""

from __future__ import annotations

import numpy as np

from service.uplift._base import (
    FitData,
    UpliftLearner,
    cross_fitted_outcomes,
    fit_outcome_models,
    predict_outcomes,
)

__all__ = ["RLearner", "r_targets"]


def r_targets(
    y: np.ndarray, treated: np.ndarray, mu0: np.ndarray, mu1: np.ndarray, e: np.ndarray
) -> tuple[np.ndarray, np.ndarray]:
    """Target and weight of the R-loss as a weighted regression, for one arm pair.

    With ``m(x) = e mu1 + (1 - e) mu0`` (the outcome mean over the pair) the R-loss
    ``sum (y - m - (t - e) tau(x))^2`` equals ``sum (t - e)^2 ((y - m) / (t - e) -
    tau(x))^2``: regress ``(y - m) / (t - e)`` with weights ``(t - e)^2``.
    """
    residual_t = treated.astype(float) - e
    residual_y = y - (e * mu1 + (1 - e) * mu0)
    return residual_y / residual_t, residual_t**2


class RLearner(UpliftLearner):
    """Minimise the R-loss over the effect model, with cross-fitted nuisances.

    For each arm ``a`` against control, on the rows of the pair: the outcome mean
    ``m(x)`` is built from outcome models of both groups cross-fitted over ``n_folds``
    folds (so no row's residual uses a model trained on it), the assignment
    probability ``e(x)`` within the pair is the known (or estimated) propensity, and
    the effect model regresses ``(y - m) / (t - e)`` with weights ``(t - e)^2``. The
    control outcome comes from a separate model fitted on all control rows.

    Parameters
    ----------
    n_folds : int, default 5
        Cross-fitting folds. Other parameters as in :class:`UpliftLearner`.

    References
    ----------
    Nie, X. & Wager, S. (2021). Quasi-oracle estimation of heterogeneous treatment
    effects. Biometrika 108(2), 299-319.
    """

    def __init__(
        self,
        *,
        base: object = "gbm",
        control: object = None,
        arms: object = None,
        outcome: str = "auto",
        propensity: str = "auto",
        min_arm_rows: int = 20,
        tune: bool = True,
        n_folds: int = 5,
        random_state: object = None,
    ) -> None:
        super().__init__(
            base=base,
            control=control,
            arms=arms,
            outcome=outcome,
            propensity=propensity,
            min_arm_rows=min_arm_rows,
            tune=tune,
            random_state=random_state,
        )
        self.n_folds = n_folds

    def _fit(self, data: FitData) -> None:
        mu = cross_fitted_outcomes(data, self.base, self.n_folds)
        p = data.propensity
        self.effect_models_ = []
        for a in range(1, data.n_arms + 1):
            rows = np.flatnonzero((data.t == 0) | (data.t == a))
            e = p[rows, a] / (p[rows, a] + p[rows, 0])
            target, weight = r_targets(
                data.y[rows], data.t[rows] == a, mu[rows, 0], mu[rows, a], e
            )
            self.effect_models_.append(
                data.fit_role(
                    f"effect:{a}", self.base, rows, target, classifier=False, weight=weight
                )
            )
        self.control_model_ = fit_outcome_models(data, self.base, arms=1)[0]

    def _predict(self, X: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        tau = np.column_stack([m.predict(X) for m in self.effect_models_])
        return tau, predict_outcomes([self.control_model_], X)[:, 0]
