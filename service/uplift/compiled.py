"""Fast scoring of fitted uplift models, for one customer per request.

:func:`compile_model` reads every scikit-learn model inside a fitted
:class:`BootstrapUplift` (the learner fitted on all rows and each bootstrap replicate)
into flat arrays; :class:`CompiledUplift` then scores a row with one compiled call
that walks all their trees and combines them as the learner does. Results equal the
scikit-learn path to rounding (tested to 1e-9).
"""

from __future__ import annotations

import os
from collections.abc import Mapping
from concurrent.futures import ThreadPoolExecutor
from functools import lru_cache
from typing import Any

import numpy as np
import pandas as pd
from scipy.stats import norm
from sklearn.utils.validation import check_is_fitted

from service.errors import BundleError, DataError
from service.uplift._base import UpliftLearner
from service.uplift._features import FeatureEncoder
from service.uplift._flatten import SPREAD_BOOTSTRAP, Program, ProgramBuilder
from service.uplift._kernels import score_rows
from service.uplift._row_encoder import RowEncoder
from service.uplift.bootstrap import BootstrapUplift
from service.uplift.dr_learner import DRLearner
from service.uplift.r_learner import RLearner
from service.uplift.s_learner import SLearner
from service.uplift.t_learner import TLearner
from service.uplift.transformed import TransformedOutcomeLearner
from service.uplift.x_learner import XLearner

__all__ = ["CompiledUplift", "RowEncoder", "add_learner", "compile_model"]

Effects = tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]
RowEffects = tuple[np.ndarray, float, np.ndarray, np.ndarray]

# Below this many rows per thread, starting threads costs more than it saves.
_ROWS_PER_THREAD = 2000


@lru_cache(maxsize=32)
def _quantile(confidence: float) -> float:
    if not 0 < confidence < 1:
        raise DataError(f"confidence={confidence!r} must lie strictly between 0 and 1.")
    return float(norm.ppf(0.5 + confidence / 2))


class CompiledUplift:
    """A fitted uplift model as flat arrays, scored by one compiled kernel.

    Build it with :func:`compile_model`. It holds no scikit-learn object, only numpy
    arrays and the feature encoder, so it pickles small and fast.

    Attributes
    ----------
    arms_, control_, outcome_type_, feature_names_in_, encoder_
        As on the source model.
    n_bootstrap_ : int
        Number of bootstrap replicates (0 for a bare learner, whose bounds are NaN, and
        for the compact form, whose bounds come from a model of the spread).
    """

    def __init__(
        self,
        program: Program,
        *,
        arms: list[Any],
        control: Any,
        outcome_type: str,
        encoder: FeatureEncoder,
    ) -> None:
        self.program = program
        self.arms_ = list(arms)
        self.control_ = control
        self.outcome_type_ = outcome_type
        self.encoder_ = encoder
        self.feature_names_in_ = np.array(encoder.names, dtype=object)
        self.n_bootstrap_ = program.n_replicates if program.spread == SPREAD_BOOTSTRAP else 0
        self.row_encoder = RowEncoder(encoder)

    @classmethod
    def like(cls, program: Program, source: Any) -> CompiledUplift:
        """A compiled model with the arms, labels and encoder of the fitted ``source``."""
        return cls(
            program,
            arms=list(source.arms_),
            control=source.control_,
            outcome_type=source.outcome_type_,
            encoder=source.encoder_,
        )

    @property
    def interval_method(self) -> str:
        """``"bootstrap"`` (spread of the refits) or ``"spread_model"`` (compact form)."""
        return "bootstrap" if self.program.spread == SPREAD_BOOTSTRAP else "spread_model"

    # -- encoding ------------------------------------------------------------------------

    def encode(self, X: Any) -> np.ndarray:
        """Encoded float matrix: a DataFrame goes through the encoder, a 2-D array is
        taken as already encoded (one column per feature, categorical codes)."""
        if isinstance(X, pd.DataFrame):
            encoded: np.ndarray = self.encoder_.transform(X)
            return encoded
        array = np.ascontiguousarray(X, dtype=float)
        if array.ndim != 2 or array.shape[1] != self.program.n_features:
            raise DataError(
                f"Encoded features must have shape (n, {self.program.n_features}), got "
                f"{array.shape}; pass a DataFrame with columns {list(self.encoder_.names)} "
                "or the output of encoder_.transform."
            )
        return array

    def encode_row(self, features: Mapping[str, Any]) -> np.ndarray:
        """Encode one customer ``{feature: value}``, as ``encoder_.transform`` would."""
        return self.row_encoder.encode(features)

    # -- scoring -------------------------------------------------------------------------

    def predict_interval(
        self, X: Any, confidence: float = 0.95, *, n_threads: int | None = None
    ) -> Effects:
        """Return ``(tau, mu0, low, high)`` as :meth:`BootstrapUplift.predict_interval`.

        Parameters
        ----------
        X : DataFrame or array of shape (n, n_features)
            A DataFrame of raw features, or already encoded features.
        confidence : float, default 0.95
            Two-sided level of the normal bootstrap interval.
        n_threads : int, optional
            Threads for a large batch; default: all cores once each gets
            ``2000`` rows or more.
        """
        z = _quantile(confidence)
        encoded = self.encode(X)
        n = len(encoded)
        outputs = self._empty(n)
        threads = n_threads or min(os.cpu_count() or 1, max(1, n // _ROWS_PER_THREAD))
        if threads <= 1:
            self._score(encoded, z, outputs)
            return outputs
        bounds = np.linspace(0, n, threads + 1).astype(int)
        with ThreadPoolExecutor(threads) as pool:
            jobs = [
                pool.submit(self._score, encoded[a:b], z, _rows(outputs, a, b))
                for a, b in zip(bounds[:-1], bounds[1:], strict=True)
            ]
            for job in jobs:
                job.result()
        return outputs

    def predict_row(
        self, features: Mapping[str, Any] | np.ndarray, confidence: float = 0.95
    ) -> RowEffects:
        """Score one customer: ``(tau, mu0, low, high)`` with ``tau``, ``low`` and
        ``high`` of shape (n_arms,) and ``mu0`` a float.

        ``features`` is ``{feature: value}`` (raw values, see :meth:`encode_row`) or an
        encoded 1-D array.
        """
        z = _quantile(confidence)
        if isinstance(features, np.ndarray):
            row = np.ascontiguousarray(features, dtype=float)
            if row.shape != (self.program.n_features,):
                raise DataError(
                    f"An encoded row must have shape ({self.program.n_features},), got "
                    f"{row.shape}; pass a dict of raw features or encode_row's output."
                )
        else:
            row = self.row_encoder.encode(features)
        tau, mu0, low, high = self._empty(1)
        self._score(row.reshape(1, -1), z, (tau, mu0, low, high))
        return tau[0], float(mu0[0]), low[0], high[0]

    def warm_up(self) -> None:
        """Compile (or load from the cache) the kernel by scoring one all-missing row."""
        self.predict_interval(np.full((1, self.program.n_features), np.nan))

    def _empty(self, n: int) -> Effects:
        arms = self.program.n_arms
        return np.empty((n, arms)), np.empty(n), np.empty((n, arms)), np.empty((n, arms))

    def _score(self, X: np.ndarray, z: float, outputs: Effects) -> None:
        p = self.program
        score_rows(
            X, z, p.node_head, p.node_right, p.node_value, p.bitsets, p.tree_roots,
            p.unit_int, p.unit_base, p.term_int, p.term_float, p.table, p.eval_unit,
            p.eval_arm, p.comb_int, p.comb_coef, p.n_replicates, p.spread, *outputs,
        )  # fmt: skip


def _rows(outputs: Effects, start: int, stop: int) -> Effects:
    tau, mu0, low, high = outputs
    return tau[start:stop], mu0[start:stop], low[start:stop], high[start:stop]


def compile_model(
    model: BootstrapUplift | UpliftLearner, *, warm_up: bool = True
) -> CompiledUplift:
    """Compile a fitted :class:`BootstrapUplift` (or a bare fitted learner, which gives
    no interval) for fast scoring.

    Parameters
    ----------
    model : BootstrapUplift or UpliftLearner
        Fitted, with the built-in ``"gbm"`` or ``"linear"`` base.
    warm_up : bool, default True
        Score one row so the kernel is compiled (or loaded from numba's cache) now
        rather than on the first request.

    Returns
    -------
    CompiledUplift

    Raises
    ------
    BundleError
        When a learner or inner model is of a kind this module cannot read.
    """
    if isinstance(model, BootstrapUplift):
        check_is_fitted(model, "estimator_")
        learners = [model.estimator_, *model.replicates_]
    elif isinstance(model, UpliftLearner):
        check_is_fitted(model, "encoder_")
        learners = [model]
    else:
        raise BundleError(
            f"compile_model needs a fitted BootstrapUplift or uplift learner, got "
            f"{type(model).__name__}."
        )
    source = learners[0]
    builder = ProgramBuilder(
        n_features=len(source.encoder_.names),
        n_arms=len(source.arms_),
        n_replicates=len(learners) - 1,
    )
    for replicate, learner in enumerate(learners):
        add_learner(builder, replicate, learner)
    compiled = CompiledUplift.like(builder.build(), source)
    if warm_up:
        compiled.warm_up()
    return compiled


def add_learner(builder: ProgramBuilder, replicate: int, learner: UpliftLearner) -> None:
    """Add the learner's combination step as terms of ``replicate``; only replicate 0
    reports the control outcome (refits only need the uplift)."""
    n_arms = builder.n_arms
    control = replicate == 0  # the control outcome is reported for the full fit only
    kind = type(learner)
    if kind is TLearner:
        for a in range(n_arms):
            builder.add(replicate, a, learner.models_[a + 1], 1.0)
            builder.add(replicate, a, learner.models_[0], -1.0)
        if control:
            builder.add(replicate, n_arms, learner.models_[0], 1.0)
    elif kind is SLearner:
        for a in range(n_arms):
            builder.add(replicate, a, learner.model_, 1.0, arm=a + 1)
            builder.add(replicate, a, learner.model_, -1.0, arm=0)
        if control:
            builder.add(replicate, n_arms, learner.model_, 1.0, arm=0)
    elif kind is XLearner:
        for a, (from_treated, from_control) in enumerate(learner.effect_models_):
            share = learner.pair_share_[a]
            builder.add(replicate, a, from_control, float(share))
            builder.add(replicate, a, from_treated, float(1 - share))
        if control:
            builder.add(replicate, n_arms, learner.outcome_models_[0], 1.0)
    elif kind in (DRLearner, RLearner, TransformedOutcomeLearner):
        for a, effect in enumerate(learner.effect_models_):
            builder.add(replicate, a, effect, 1.0)
        if control:
            builder.add(replicate, n_arms, learner.control_model_, 1.0)
    else:
        raise BundleError(
            f"compile_model cannot compile a {kind.__name__}; score it with its own "
            "predict_interval, or use one of the built-in learners."
        )
