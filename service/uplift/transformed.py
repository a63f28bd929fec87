"""Transformed-outcome learner."""

from __future__ import annotations

import numpy as np

from service.uplift._base import FitData, UpliftLearner, fit_outcome_models, predict_outcomes

__all__ = ["TransformedOutcomeLearner"]


class TransformedOutcomeLearner(UpliftLearner):
    """Regress ``z_a = y (1[t=a] / e_a - 1[t=0] / e_0)``, whose mean given x is tau_a(x).

    With a binary outcome and equal arm shares this is the class-transformation
    approach; in general it is the inverse-propensity transformed outcome. It is unbiased
    but noisy: expect it to need more rows than the other learners, and prefer it for
    binary outcomes (a continuous outcome far from zero inflates its variance). The
    control outcome comes from a separate model fitted on control rows.

    References
    ----------
    Athey, S. & Imbens, G. W. (2015). Machine learning methods for estimating
    heterogeneous causal effects. arXiv:1504.01132.
    Jaskowski, M. & Jaroszewicz, S. (2012). Uplift modeling for clinical trial data.
    ICML Workshop on Clinical Data Analysis.
    """

    def _fit(self, data: FitData) -> None:
        arm = data.t[:, None] == np.arange(data.n_arms + 1)
        scaled = data.y[:, None] * arm / data.propensity
        z = scaled[:, 1:] - scaled[:, :1]
        rows = np.arange(len(data.y))
        self.effect_models_ = [
            data.fit_role(f"effect:{j + 1}", self.base, rows, z[:, j], classifier=False)
            for j in range(data.n_arms)
        ]
        self.control_model_ = fit_outcome_models(data, self.base, arms=1)[0]

    def _predict(self, X: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        tau = np.column_stack([m.predict(X) for m in self.effect_models_])
        return tau, predict_outcomes([self.control_model_], X)[:, 0]
