"""X-learner."""

from __future__ import annotations

import numpy as np

from service.uplift._base import FitData, UpliftLearner, fit_outcome_models, predict_outcomes

__all__ = ["XLearner"]


class XLearner(UpliftLearner):
    """Impute individual effects from the other arm's outcome model, then regress them.

    For arm ``a``: on treated rows ``D = y - mu_0(x)``, on control rows
    ``D = mu_a(x) - y``; effect models ``tau_a^1`` and ``tau_a^0`` are fitted to each and
    combined as ``g tau_a^0 + (1 - g) tau_a^1`` with ``g`` the probability of arm ``a``
    within the pair {control, a}, averaged over the training rows (constant in a
    randomized campaign).

    References
    ----------
    Künzel, Sekhon, Bickel & Yu (2019). Metalearners for estimating heterogeneous
    treatment effects using machine learning. PNAS 116(10), 4156-4165.
    """

    def _fit(self, data: FitData) -> None:
        self.outcome_models_ = fit_outcome_models(data, self.base)
        mu = predict_outcomes(self.outcome_models_, data.X)
        self.effect_models_ = []
        for a in range(1, data.n_arms + 1):
            treated, control = np.flatnonzero(data.t == a), np.flatnonzero(data.t == 0)
            pair = [
                data.fit_role(f"{role}:{a}", self.base, rows, imputed, classifier=False)
                for role, rows, imputed in (
                    ("effect-treated", treated, data.y[treated] - mu[treated, 0]),
                    ("effect-control", control, mu[control, a] - data.y[control]),
                )
            ]
            self.effect_models_.append(pair)
        p = data.propensity
        self.pair_share_ = (p[:, 1:] / (p[:, 1:] + p[:, :1])).mean(axis=0)

    def _predict(self, X: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        mu0 = predict_outcomes(self.outcome_models_[:1], X)[:, 0]
        tau = np.empty((len(X), len(self.effect_models_)))
        for j, (from_treated, from_control) in enumerate(self.effect_models_):
            g = self.pair_share_[j]
            tau[:, j] = g * from_control.predict(X) + (1 - g) * from_treated.predict(X)
        return tau, mu0
