"""The compact serving form: the full-data fit, exactly, and a small model of its spread.

The full form scores a row with the learner fitted on all rows *and* every bootstrap
refit, which is most of its cost (21 fits for 20 replicates). The compact form keeps the
point estimates exact by evaluating the full-data fit alone, and replaces the refits by
one small gradient-boosting regression per arm of the log bootstrap standard deviation,
fitted on training rows and on synthetic rows near them, all labelled by the full form
(a distilled model of the spread; MUNGE, Bucilua et al. 2006). Its interval is
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
SIGKDD, 535-541 (fitting a small model to an ensemble's outputs on real and MUNGE
synthetic rows; citation and MUNGE's details from memory).
"""

from __future__ import annotations

import json
from pathlib import Path
from typing import Any

import numpy as np
from scipy.stats import norm
from sklearn.ensemble import HistGradientBoostingRegressor
from sklearn.neighbors import NearestNeighbors

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
    "synthetic_rows",
]

# Each of these trees is walked for every scored row. Measured with 20 refits, 20,000
# training rows (bench/quality.py's seed-0 fits; do-not-contact agreement with the full
# form, worst of the levels 0.80/0.90/0.95, on the held-out training quarter / on 50,000
# test rows). The previous 200 trees of 15 leaves at rate 0.1, fitted on the fit rows
# alone: groups 98.86/98.89%, groups_two_arms 98.68/98.83%, larkspur 99.04/98.98%, nw_c
# 98.90/99.07%, nw_d 97.84/98.08%. These 60 trees of 63 leaves at rate 0.3, fitted on the
# fit rows plus four synthetic rows per row (_SYNTHETIC_PER_ROW) with rows near a
# do-not-contact boundary weighted up (_boundary_weights): 99.12/99.05%, 99.02/99.10%,
# 99.44/99.38%, 98.90/99.26%, 98.08/98.32%. The demo's compact-form kernel went from 62 to
# 45 us/row (1 thread, side by side, loaded machine). 255 leaves and eight synthetic rows
# per row gained 0.1-0.2 point on groups and nw_d and none on nw_c's held-out rows, with
# four times the nodes.
SPREAD_PARAMS: dict[str, Any] = {
    "learning_rate": 0.3,
    "max_iter": 60,
    "max_leaf_nodes": 63,
    "min_samples_leaf": 20,
    "l2_regularization": 1.0,
    "early_stopping": False,
}
_Z1 = float(norm.ppf(0.975))
# The spread is a fixed function of the features, so more rows labelled by the full form
# teach it better; synthetic rows per training row, at most _MAX_SYNTHETIC in all.
_SYNTHETIC_PER_ROW = 4
_MAX_SYNTHETIC = 200_000
_SWAP_SHARE = 0.5  # MUNGE's p: share of a row's features moved towards its neighbour's
# One-sided do-not-contact levels the fidelity check reads (service.evaluation.fidelity);
# rows whose |tau| / sd lies within about 15% of one of these z get up to 4 times the
# weight (boundary width and weight chosen on the measurements above, no source).
_BOUNDARY_Z = tuple(float(norm.ppf(c)) for c in (0.80, 0.90, 0.95))
_BOUNDARY_WIDTH = 0.15
_BOUNDARY_WEIGHT = 3.0


def interval_sd(tau: np.ndarray, high: np.ndarray, confidence: float) -> np.ndarray:
    """The standard deviation behind a normal interval ``tau +/- z * sd``."""
    return np.asarray((high - tau) / norm.ppf(0.5 + confidence / 2), dtype=float)


def bootstrap_sd(full: CompiledUplift, encoded: np.ndarray) -> np.ndarray:
    """Bootstrap standard deviation of each arm's uplift, shape (n, n_arms)."""
    tau, _, _, high = full.predict_interval(encoded, confidence=0.95)
    return np.asarray((high - tau) / _Z1, dtype=float)


def fit_spread_models(
    full: CompiledUplift, encoded: np.ndarray, *, seed: int
) -> list[HistGradientBoostingRegressor]:
    """One regression per arm of the full form's ``log sd`` on the encoded features.

    Fitted on ``encoded`` and on synthetic rows near them (:func:`synthetic_rows`), all
    labelled by ``full``; rows near a do-not-contact boundary weigh more. Zero spreads
    (e.g. a feature region no refit splits) are floored at a millionth of the largest
    spread, so the log stays finite.
    """
    if len(encoded) < 2 * SPREAD_PARAMS["min_samples_leaf"]:
        raise DataError(
            f"{len(encoded)} rows are too few to fit a model of the bootstrap spread; "
            "train on more rows or serve the full form."
        )
    categorical = full.encoder_.categorical_mask
    rng = np.random.default_rng(seed)
    n_synthetic = min(_SYNTHETIC_PER_ROW * len(encoded), _MAX_SYNTHETIC)
    rows = np.vstack([encoded, synthetic_rows(encoded, categorical, n_synthetic, rng)])
    tau, _, _, high = full.predict_interval(rows, confidence=0.95)
    sd = (high - tau) / _Z1
    models = []
    for a in range(sd.shape[1]):
        floor = max(float(np.max(sd[:, a], initial=0.0)) * 1e-6, 1e-12)
        sd_a = np.maximum(sd[:, a], floor)
        model = HistGradientBoostingRegressor(
            **SPREAD_PARAMS,
            categorical_features=categorical if categorical.any() else None,
            random_state=seed + a,
        )
        models.append(
            model.fit(rows, np.log(sd_a), sample_weight=_boundary_weights(tau[:, a], sd_a))
        )
    return models


def synthetic_rows(
    encoded: np.ndarray, categorical: np.ndarray, n: int, rng: np.random.Generator
) -> np.ndarray:
    """``n`` rows near ``encoded``'s, after MUNGE (Bucilua et al. 2006).

    Each is a copy of a row in which, with probability ``_SWAP_SHARE`` per feature, a
    category is replaced by that of the row's nearest neighbour (standardised features)
    and a number is drawn from a normal centred on the neighbour's value with standard
    deviation their distance. Missing values stay as they are.
    """
    filled = np.where(np.isnan(encoded), np.nanmean(encoded, axis=0), encoded)
    filled = np.nan_to_num(filled)  # a column with no value at all
    scale = filled.std(axis=0)
    standard = (filled - filled.mean(axis=0)) / np.where(scale > 0, scale, 1.0)
    neighbour = NearestNeighbors(n_neighbors=2).fit(standard)
    near = neighbour.kneighbors(standard, return_distance=False)[:, 1]
    base = np.resize(rng.permutation(len(encoded)), n)
    own, other = encoded[base], encoded[near[base]]
    moved = np.where(
        categorical, other, rng.normal(np.nan_to_num(other), np.nan_to_num(np.abs(own - other)))
    )
    move = (rng.random(own.shape) < _SWAP_SHARE) & ~np.isnan(own) & ~np.isnan(other)
    return np.where(move, moved, own)


def _boundary_weights(tau: np.ndarray, sd: np.ndarray) -> np.ndarray:
    """1, plus up to ``_BOUNDARY_WEIGHT`` per level where ``-tau / sd`` is near its z."""
    weight = np.ones(len(tau))
    harmful = tau < 0
    ratio = np.log(-tau[harmful] / sd[harmful])
    for z in _BOUNDARY_Z:
        gap = (ratio - np.log(z)) / _BOUNDARY_WIDTH
        weight[harmful] += _BOUNDARY_WEIGHT * np.exp(-0.5 * gap**2)
    return weight


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
