"""What a servable model must provide, and the ways upshot provides it.

A fitted :class:`~service.uplift.BootstrapUplift` predicts a whole table through
scikit-learn; its compiled form (``service.uplift.compiled``) evaluates the same trees
and linear terms in one numba kernel, which also makes a single customer cheap. Both are
the *full* form: the full-data fit and every bootstrap refit. The *compact* form
(``service.uplift.compact``), made at training time when its fidelity passed, evaluates
the full-data fit and a small model of the bootstrap spread instead, and is loaded
without unpickling anything. :func:`load_servable` serves the compact form when asked
for and available, else the compiled full form, else scikit-learn.
"""

from __future__ import annotations

import logging
from dataclasses import dataclass
from typing import Any, Protocol

import numpy as np
import numpy.typing as npt

from service.errors import BundleError
from service.registry import LoadedBundle, ModelRegistry
from service.registry.forms import load_compact, pick_form
from service.scoring.features import FeatureTable

__all__ = ["Estimates", "ServableModel", "load_servable", "servable"]

logger = logging.getLogger(__name__)

Array = npt.NDArray[np.float64]


@dataclass(frozen=True)
class Estimates:
    """Per-arm uplift with bounds, shape (n, n_arms), and the no-contact outcome (n,)."""

    tau: Array
    mu0: Array
    low: Array
    high: Array

    def take(self, columns: npt.NDArray[np.intp]) -> Estimates:
        """Keep the arm columns a campaign uses, in the campaign's order."""
        return Estimates(self.tau[:, columns], self.mu0, self.low[:, columns],
                         self.high[:, columns])  # fmt: skip


class ServableModel(Protocol):
    """A model the service can score with."""

    kind: str
    form: str  # "full" or "compact": which of the bundle's forms produces the numbers

    def estimate(
        self, table: FeatureTable, confidence: float, *, threads: int | None = None
    ) -> Estimates:
        """Estimates for every row of a validated table (two-sided ``confidence``), on at
        most ``threads`` threads (default: as many as pay off)."""
        ...

    def estimate_row(self, row: dict[str, Any], confidence: float) -> Estimates:
        """Estimates for one validated row (two-sided ``confidence``)."""
        ...


class _Bootstrap:
    """Scores through the fitted scikit-learn models (always available)."""

    kind = "scikit-learn"
    form = "full"

    def __init__(self, model: Any) -> None:
        self.model = model

    def estimate(
        self, table: FeatureTable, confidence: float, *, threads: int | None = None
    ) -> Estimates:
        tau, mu0, low, high = self.model.predict_interval(table.frame(), confidence=confidence)
        return Estimates(_2d(tau), np.asarray(mu0, dtype=float), _2d(low), _2d(high))

    def estimate_row(self, row: dict[str, Any], confidence: float) -> Estimates:
        columns = {name: np.array([value], dtype=object) for name, value in row.items()}
        return self.estimate(FeatureTable(columns, [[]]), confidence)


class _Compiled:
    """Scores through the compiled kernel (same numbers, far less overhead per call)."""

    kind = "compiled"

    def __init__(self, compiled: Any, form: str = "full") -> None:
        self.compiled = compiled
        self.form = form
        if form == "compact":
            self.kind = "compact"

    def estimate(
        self, table: FeatureTable, confidence: float, *, threads: int | None = None
    ) -> Estimates:
        tau, mu0, low, high = self.compiled.predict_interval(
            table.frame(), confidence=confidence, n_threads=threads
        )
        return Estimates(_2d(tau), np.asarray(mu0, dtype=float), _2d(low), _2d(high))

    def estimate_row(self, row: dict[str, Any], confidence: float) -> Estimates:
        tau, mu0, low, high = self.compiled.predict_row(row, confidence)
        return Estimates(
            np.asarray(tau, dtype=float).reshape(1, -1),
            np.asarray(mu0, dtype=float).reshape(1),
            np.asarray(low, dtype=float).reshape(1, -1),
            np.asarray(high, dtype=float).reshape(1, -1),
        )


def servable(model: Any, *, compile: bool = True) -> ServableModel:
    """Wrap a fitted model, compiled when possible (``compile=False`` forces scikit-learn)."""
    if compile:
        try:
            from service.uplift.compiled import compile_model
        except ImportError:
            logger.warning("the compiled scoring path is not installed; using scikit-learn")
        else:
            try:
                return _Compiled(compile_model(model))
            except BundleError as err:
                logger.warning("model cannot be compiled (%s); using scikit-learn", err)
    return _Bootstrap(model)


def load_servable(
    registry: ModelRegistry,
    name: str,
    version: str,
    *,
    form: str = "compact",
    compile: bool = True,
) -> tuple[LoadedBundle, ServableModel]:
    """Verify a version and load the form that serves it.

    ``form="compact"`` serves the compact form when the bundle has one (the model file
    is then verified but never unpickled) and the full form otherwise; ``form="full"``
    always serves the full form, compiled unless ``compile=False``.
    """
    bundle = registry.load(name, version, unpickle=False)
    chosen, why = pick_form(bundle.manifest, form)
    if chosen == "compact":
        compiled = load_compact(bundle.path, bundle.manifest)
        compiled.warm_up()
        model: ServableModel = _Compiled(compiled, form="compact")
    else:
        bundle = registry.load(name, version)
        model = servable(bundle.model, compile=compile)
    logger.info("model %s:%s serves its %s form (%s; %s path)", name, version, chosen, why,
                model.kind)  # fmt: skip
    return bundle, model


def _2d(values: Any) -> Array:
    array = np.asarray(values, dtype=float)
    return array.reshape(len(array), -1) if array.ndim == 1 else array
