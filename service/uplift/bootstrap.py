"""Bootstrap intervals for any uplift learner."""

from __future__ import annotations

from typing import Any

import numpy as np
from scipy.stats import norm
from sklearn.base import BaseEstimator, clone
from sklearn.utils import check_random_state
from sklearn.utils.validation import check_is_fitted

from service.errors import DataError
from service.uplift._base import UpliftLearner

__all__ = ["BootstrapUplift"]


class BootstrapUplift(BaseEstimator):  # type: ignore[misc]
    """Wrap a learner to give a confidence interval for each uplift prediction.

    The point estimate comes from the learner fitted on all rows. The learner is refitted
    on ``n_bootstrap`` resamples drawn with replacement within each arm (so arm sizes
    stay fixed, as in the randomized design), and the interval is the normal bootstrap
    interval ``tau(x) +/- z * sd_b(tau_b(x))``. A do-not-contact rule built on the upper
    bound therefore needs the learner's own uncertainty, not just a negative point.

    Parameters
    ----------
    learner : UpliftLearner
        Unfitted template; cloned.
    n_bootstrap : int, default 20
    random_state : int, RandomState or None

    References
    ----------
    Efron, B. & Tibshirani, R. J. (1993). An Introduction to the Bootstrap. Chapman &
    Hall, ch. 12-13 (normal bootstrap interval).
    """

    def __init__(
        self, learner: UpliftLearner, *, n_bootstrap: int = 20, random_state: Any = None
    ) -> None:
        self.learner = learner
        self.n_bootstrap = n_bootstrap
        self.random_state = random_state

    def fit(
        self,
        X: Any,
        y: Any,
        treatment: Any,
        *,
        propensity: Any = None,
        sample_weight: Any = None,
    ) -> BootstrapUplift:
        """Fit the learner on all rows and on each within-arm bootstrap resample."""
        if not isinstance(self.n_bootstrap, int) or self.n_bootstrap < 2:
            raise DataError(f"n_bootstrap={self.n_bootstrap!r} must be an integer of at least 2.")
        rng = check_random_state(self.random_state)
        self.estimator_ = clone(self.learner).set_params(random_state=rng.randint(2**31 - 1))
        data = self.estimator_._prepare(X, y, treatment, propensity, sample_weight)
        self.estimator_._fit(data)
        by_arm = [np.flatnonzero(data.t == k) for k in range(data.n_arms + 1)]
        self.replicates_ = []
        for _ in range(self.n_bootstrap):
            rows = np.concatenate([rng.choice(idx, size=len(idx)) for idx in by_arm])
            replicate = clone(self.estimator_)
            replicate._fit(data.subset(rows, np.random.RandomState(rng.randint(2**31 - 1))))
            replicate.arms_ = self.estimator_.arms_
            self.replicates_.append(replicate)
        return self

    def __getattr__(self, name: str) -> Any:
        # Fitted attributes of the wrapped learner (arms_, control_, encoder_, ...).
        if name.endswith("_") and not name.startswith("__") and "estimator_" in self.__dict__:
            return getattr(self.__dict__["estimator_"], name)
        raise AttributeError(name)

    def predict_effects(self, X: Any) -> tuple[np.ndarray, np.ndarray]:
        """``(tau, mu0)`` from the learner fitted on all rows."""
        check_is_fitted(self, "estimator_")
        tau, mu0 = self.estimator_.predict_effects(X)
        return tau, mu0

    def predict(self, X: Any) -> np.ndarray:
        """Uplift of each arm against control, shape (n, n_arms)."""
        return self.predict_effects(X)[0]

    def predict_control(self, X: Any) -> np.ndarray:
        """Expected outcome without contact, shape (n,)."""
        return self.predict_effects(X)[1]

    def predict_interval(
        self, X: Any, confidence: float = 0.95
    ) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
        """Return ``(tau, mu0, low, high)``; the bounds have the shape of ``tau``.

        ``confidence`` is two-sided: 0.95 gives the 2.5% and 97.5% normal bounds.
        """
        if not 0 < confidence < 1:
            raise DataError(f"confidence={confidence!r} must lie strictly between 0 and 1.")
        check_is_fitted(self, "estimator_")
        encoded = self.estimator_._encode(X)
        tau, mu0 = self.estimator_._predict(encoded)
        draws = np.stack([r._predict(encoded)[0] for r in self.replicates_])
        half = norm.ppf(0.5 + confidence / 2) * draws.std(axis=0, ddof=1)
        return tau, mu0, tau - half, tau + half
