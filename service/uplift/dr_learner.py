"""Doubly robust learner (DR-learner) with cross-fitting."""

from __future__ import annotations

import numpy as np

from service.uplift._base import (
    FitData,
    UpliftLearner,
    cross_fitted_outcomes,
    fit_outcome_models,
    predict_outcomes,
)

__all__ = ["DRLearner", "dr_pseudo_outcomes"]


def dr_pseudo_outcomes(
    y: np.ndarray, t: np.ndarray, mu: np.ndarray, propensity: np.ndarray
) -> np.ndarray:
    """AIPW pseudo-outcome of each arm against control, shape (n, n_arms).

    ``phi_a = mu_a - mu_0 + 1[t=a] (y - mu_a) / e_a - 1[t=0] (y - mu_0) / e_0``; its
    conditional mean is ``tau_a(x)`` when either the outcome models or the
    propensities are right.
    """
    residual = (y[:, None] - mu) / propensity * (t[:, None] == np.arange(mu.shape[1]))
    return np.asarray(mu[:, 1:] - mu[:, :1] + residual[:, 1:] - residual[:, :1])


class DRLearner(UpliftLearner):
    """Regress the doubly robust pseudo-outcome on the features.

    Outcome models (and, with ``propensity="estimate"``, the assignment model) are
    cross-fitted over ``n_folds`` folds so that no row's pseudo-outcome uses a model
    trained on that row.

    Parameters
    ----------
    n_folds : int, default 5
        Cross-fitting folds. Other parameters as in :class:`UpliftLearner`.

    References
    ----------
    Kennedy, E. H. (2023). Towards optimal doubly robust estimation of heterogeneous
    causal effects. Electronic Journal of Statistics 17(2), 3008-3049.
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
        phi = dr_pseudo_outcomes(data.y, data.t, mu, data.propensity)
        rows = np.arange(len(data.y))
        self.effect_models_ = [
            data.fit_role(f"effect:{j + 1}", self.base, rows, phi[:, j], classifier=False)
            for j in range(data.n_arms)
        ]
        self.control_model_ = fit_outcome_models(data, self.base, arms=1)[0]

    def _predict(self, X: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        tau = np.column_stack([m.predict(X) for m in self.effect_models_])
        return tau, predict_outcomes([self.control_model_], X)[:, 0]
