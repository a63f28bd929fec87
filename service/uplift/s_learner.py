"""Single-model approach (S-learner)."""

from __future__ import annotations

import numpy as np

from service.uplift._base import FitData, UpliftLearner
from service.uplift._bases import predict_mean

__all__ = ["SLearner"]


class SLearner(UpliftLearner):
    """One outcome model with the arm as an extra categorical feature.

    ``tau_a(x) = mu(x, a) - mu(x, control)``. With ``base="linear"`` there are no
    arm-by-feature interactions, so the effect is the same for everyone; prefer
    trees when effects vary.

    References
    ----------
    Künzel, Sekhon, Bickel & Yu (2019). Metalearners for estimating heterogeneous
    treatment effects using machine learning. PNAS 116(10), 4156-4165.
    """

    def _fit(self, data: FitData) -> None:
        self.model_ = data.fit_role(
            "outcome",
            self.base,
            np.arange(len(data.y)),
            X=_with_arm(data.X, data.t.astype(float)),
            categorical=np.append(data.categorical, True),
        )

    def _predict(self, X: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        mu = np.column_stack(
            [
                predict_mean(self.model_, _with_arm(X, np.full(len(X), float(k))))
                for k in range(len(self.arms_) + 1)
            ]
        )
        return mu[:, 1:] - mu[:, :1], mu[:, 0]


def _with_arm(X: np.ndarray, arm: np.ndarray) -> np.ndarray:
    return np.column_stack([X, arm])
