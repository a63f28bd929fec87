"""Two-model approach (T-learner)."""

from __future__ import annotations

import numpy as np

from service.uplift._base import FitData, UpliftLearner, fit_outcome_models, predict_outcomes

__all__ = ["TLearner"]


class TLearner(UpliftLearner):
    """One outcome model per arm; uplift is the difference of their predictions.

    ``tau_a(x) = mu_a(x) - mu_0(x)`` where ``mu_k`` is fitted on the rows of arm ``k``
    only. Parameters are those of :class:`UpliftLearner`.

    References
    ----------
    Künzel, Sekhon, Bickel & Yu (2019). Metalearners for estimating heterogeneous
    treatment effects using machine learning. PNAS 116(10), 4156-4165.
    """

    def _fit(self, data: FitData) -> None:
        self.models_ = fit_outcome_models(data, self.base)

    def _predict(self, X: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        mu = predict_outcomes(self.models_, X)
        return mu[:, 1:] - mu[:, :1], mu[:, 0]
