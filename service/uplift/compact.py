"""The compact serving form: the full-data fit, exactly, and a small model of its spread.

The full form scores a row with the learner fitted on all rows *and* every bootstrap
refit, which is most of its cost (21 fits for 20 replicates). The compact form keeps the
point estimates exact by evaluating the full-data fit alone, and replaces the refits by
one shallow gradient-boosting regression per arm of the log bootstrap standard deviation,
fitted on training rows (a distilled model of the spread). Its interval is
``tau(x) +/- z * exp(g_a(x))``, the normal bootstrap interval of the full form with the
standard deviation read from ``g_a`` instead of recomputed from the refits.

Both parts are flattened into one :class:`~service.uplift._flatten.Program` (replicate
1 holds the spread models), scored by the same compiled kernel, and saved as a plain
``.npz`` with its labels and feature schema, so loading it unpickles nothing.

References
----------
Efron, B. & Tibshirani, R. J. (1993). An Introduction to the Bootstrap. Chapman & Hall,
ch. 12-13 (normal bootstrap interval).
Bucilua, C., Caruana, R. & Niculescu-Mizil, A. (2006). Model compression. Proc. 12th ACM
SIGKDD, 535-541 (fitting a small model to an ensemble's outputs; citation from memory).
"""

from __future__ import annotations

import json
from pathlib import Path
from typing import Any

import numpy as np
from scipy.stats import norm
from sklearn.ensemble import HistGradientBoostingRegressor

from service.errors import BundleError, DataError
from service.uplift._features import FeatureEncoder, FeatureSpec
from service.uplift._flatten import SPREAD_MODEL, Program, ProgramBuilder
from service.uplift.bootstrap import BootstrapUplift
from service.uplift.compiled import CompiledUplift, add_learner

__all__ = [
    "SPREAD_PARAMS",
    "bootstrap_sd",
    "compact_form",
    "fit_spread_models",
    "interval_sd",
    "load_form",
    "save_form",
]

# Each of these trees is walked for every scored row. Measured on S- and T-learners of
# the demo design: 60 trees of 8 leaves per arm agreed with the full form's
# do-not-contact flags on ~98.3-98.8% of held-out rows, 200 trees of 15 leaves on
# ~99.2-99.5%, at about 1.7 times the cost; 31 leaves gained nothing more.
SPREAD_PARAMS: dict[str, Any] = {
    "learning_rate": 0.1,
    "max_iter": 200,
    "max_leaf_nodes": 15,
    "min_samples_leaf": 40,
    "l2_regularization": 1.0,
    "early_stopping": False,
}
_Z1 = float(norm.ppf(0.975))


def interval_sd(tau: np.ndarray, high: np.ndarray, confidence: float) -> np.ndarray:
    """The standard deviation behind a normal interval ``tau +/- z * sd``."""
    return np.asarray((high - tau) / norm.ppf(0.5 + confidence / 2), dtype=float)


def bootstrap_sd(full: CompiledUplift, encoded: np.ndarray) -> np.ndarray:
    """Bootstrap standard deviation of each arm's uplift, shape (n, n_arms)."""
    tau, _, _, high = full.predict_interval(encoded, confidence=0.95)
    return np.asarray((high - tau) / _Z1, dtype=float)


def fit_spread_models(
    encoded: np.ndarray, sd: np.ndarray, categorical: np.ndarray, *, seed: int
) -> list[HistGradientBoostingRegressor]:
    """One regression of ``log sd`` per arm on the encoded features.

    Zero spreads (e.g. a feature region no refit splits) are floored at a millionth of
    the largest spread, so the log stays finite.
    """
    if len(encoded) < 2 * SPREAD_PARAMS["min_samples_leaf"]:
        raise DataError(
            f"{len(encoded)} rows are too few to fit a model of the bootstrap spread; "
            "train on more rows or serve the full form."
        )
    models = []
    for a in range(sd.shape[1]):
        floor = max(float(np.max(sd[:, a], initial=0.0)) * 1e-6, 1e-12)
        target = np.log(np.maximum(sd[:, a], floor))
        model = HistGradientBoostingRegressor(
            **SPREAD_PARAMS,
            categorical_features=categorical if categorical.any() else None,
            random_state=seed + a,
        )
        models.append(model.fit(encoded, target))
    return models


def compact_form(model: BootstrapUplift, spread_models: list[Any]) -> CompiledUplift:
    """The compact form: ``model``'s full-data fit plus ``spread_models`` (one per arm).

    Raises
    ------
    BundleError
        When the learner or an inner model cannot be flattened (see
        :func:`~service.uplift.compiled.compile_model`).
    """
    learner = model.estimator_
    if len(spread_models) != len(learner.arms_):
        raise DataError(
            f"{len(spread_models)} spread models were given for {len(learner.arms_)} arms; "
            "fit one per arm."
        )
    builder = ProgramBuilder(
        n_features=len(learner.encoder_.names),
        n_arms=len(learner.arms_),
        n_replicates=1,
        spread=SPREAD_MODEL,
    )
    add_learner(builder, 0, learner)
    for a, spread in enumerate(spread_models):
        builder.add(1, a, spread, 1.0)
    return CompiledUplift.like(builder.build(), learner)


# -- storage --------------------------------------------------------------------------


def save_form(compiled: CompiledUplift, path: Path) -> None:
    """Write ``compiled`` as a pickle-free ``.npz``: its arrays, labels and schema."""
    meta = {
        "arms": list(compiled.arms_),
        "control": compiled.control_,
        "outcome_type": compiled.outcome_type_,
        "features": [spec.to_dict() for spec in compiled.encoder_.specs],
    }
    arrays = compiled.program.arrays() | {"meta": np.array(json.dumps(meta))}
    with path.open("wb") as handle:
        np.savez_compressed(handle, **arrays)  # type: ignore[arg-type]


def load_form(path: Path) -> CompiledUplift:
    """Read a form written by :func:`save_form` (no pickle is ever loaded).

    The caller checks the file's digest first; this checks that it is well formed.
    """
    where = str(path)
    try:
        with np.load(path, allow_pickle=False) as data:
            arrays = {key: data[key] for key in data.files}
        meta = json.loads(str(arrays.pop("meta")))
        specs = [
            FeatureSpec(**{**spec, "categories": tuple(spec["categories"])})
            for spec in meta["features"]
        ]
        labels = (list(meta["arms"]), meta["control"], str(meta["outcome_type"]))
    except (OSError, ValueError, KeyError, TypeError) as err:
        raise BundleError(
            f"{where} cannot be read as a serving form ({err}); retrain the model or serve "
            "the full form."
        ) from err
    program = Program.from_arrays(arrays, where)
    if program.n_features != len(specs) or program.n_arms != len(labels[0]):
        raise BundleError(f"{where} does not match its own feature schema or arms; retrain.")
    return CompiledUplift(
        program,
        arms=labels[0],
        control=labels[1],
        outcome_type=labels[2],
        encoder=FeatureEncoder(specs),
    )
