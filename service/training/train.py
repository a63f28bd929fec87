"""Train a model version: validate, select the learner by cross-validated Qini, fit, write."""

from __future__ import annotations

import sys
from collections.abc import Mapping, Sequence
from contextlib import nullcontext
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import joblib
import pandas as pd
from threadpoolctl import threadpool_limits
from tqdm import tqdm

from service.errors import DataError
from service.evaluation.fidelity import FidelityThresholds
from service.evaluation.segments import honest_segments
from service.evaluation.selection import CrossValidated, cross_validated_uplift, select_learner
from service.registry import (
    MODEL_FILE,
    OOF_FILE,
    REPORT_DIR,
    ModelRegistry,
    OutOfFold,
    categorical_reference,
    check_name,
    library_versions,
    numeric_reference,
    write_out_of_fold,
)
from service.registry.forms import COMPACT_FILE, form_record
from service.registry.state import utc_now
from service.reporting import Economics, write_report
from service.training._json import jsonable
from service.training.fingerprint import data_fingerprint
from service.training.forms import FormBuild, build_compact_form
from service.training.validate import Propensity, TrainingData, prepare_training_data
from service.uplift import LEARNERS, BootstrapUplift, UpliftLearner, make_learner
from service.uplift.compact import save_form

__all__ = ["AUTO_CANDIDATES", "TrainingResult", "segments_entry", "train_model"]

# Candidates tried by learner="auto", in order of preference on ties (simplest first).
AUTO_CANDIDATES = ("t", "s", "x", "dr", "r", "transformed")
_SELECTION_RULE = "mean over arms of the pooled out-of-fold normalised Qini coefficient"


@dataclass(frozen=True)
class TrainingResult:
    """The version written, where it is, its manifest, the fitted model and its report."""

    name: str
    version: str
    path: Path
    manifest: dict[str, Any]
    model: BootstrapUplift

    @property
    def report(self) -> Path:
        """The HTML report of this version."""
        return self.path / REPORT_DIR / "index.html"

    @property
    def serving_form(self) -> str:
        """The form served by default: ``"compact"``, or ``"full"`` when none was built."""
        return str(self.manifest["serving"]["default"])


def _learner(
    name: str, base: str, data: TrainingData, random_state: int, tune: bool = True
) -> UpliftLearner:
    return make_learner(
        name,
        base=base,
        control=data.control,
        arms=data.arms,
        random_state=random_state,
        tune=tune,
    )


def _candidates(learner: str) -> tuple[str, ...]:
    if learner == "auto":
        return AUTO_CANDIDATES
    if learner not in LEARNERS:
        raise DataError(
            f"Unknown learner {learner!r}; choose 'auto' or one of {sorted(LEARNERS)}."
        )
    return (learner,)


def _cross_validate(
    names: tuple[str, ...],
    data: TrainingData,
    base: str,
    n_splits: int,
    random_state: int,
    bar: tqdm[Any],
    tune: bool,
) -> tuple[str, CrossValidated, dict[str, float]]:
    common: dict[str, Any] = {
        "propensity": data.propensity,
        "sample_weight": data.sample_weight,
        "n_splits": n_splits,
        "random_state": random_state,
        "importance": True,
    }
    if len(names) == 1:
        bar.set_description(f"cross-validating {names[0]}")
        learner = _learner(names[0], base, data, random_state, tune)
        cv = cross_validated_uplift(
            learner, data.X, data.y, data.treatment, on_fold=lambda _: bar.update(), **common
        )
        return names[0], cv, {names[0]: cv.score}

    def step(name: str, _: int) -> None:
        bar.set_description(f"cross-validating {name}")
        bar.update()

    candidates = {name: _learner(name, base, data, random_state, tune) for name in names}
    result = select_learner(candidates, data.X, data.y, data.treatment, on_fold=step, **common)
    return result.best, result.results[result.best], dict(result.scores)


# Defaults of the segments stored with every version (``upshot segments`` reads them).
SEGMENT_DEPTH, SEGMENT_MIN_SHARE = 3, 0.05


def segments_entry(
    data: TrainingData,
    oof: Any,
    *,
    depth: int = SEGMENT_DEPTH,
    min_share: float = SEGMENT_MIN_SHARE,
    random_state: int = 0,
) -> dict[str, Any]:
    """The manifest's ``segments``: honest segments of the training rows, scored by the
    out-of-fold predictions ``oof``, shape (n, n_arms) in the order of ``data.arms``
    (see :func:`~service.evaluation.segments.honest_segments`)."""
    found = honest_segments(
        data.X,
        data.y,
        data.treatment,
        oof,
        arms=list(data.arms),
        control=data.control,
        depth=depth,
        min_share=min_share,
        sample_weight=data.sample_weight,
        random_state=random_state,
    )
    return {
        "method": (
            "a tree per arm grown on a random half of the training rows (transformed "
            "outcome), every figure measured on the other half; predicted uplift is "
            "out of fold"
        ),
        "depth": depth,
        "min_share": min_share,
        "random_state": random_state,
        "features": [str(c) for c in data.X.columns],
        "segments": [segment.to_dict() for segment in found],
    }


def _in_data_order(cv: CrossValidated, data: TrainingData) -> Any:
    return cv.oof[:, [cv.arms.index(arm) for arm in data.arms]]


def _importance_entry(cv: CrossValidated) -> dict[str, Any]:
    return {
        "method": (
            "out-of-fold permutation importance on the uplift score: each fold's model "
            "rescores its held-out rows with one feature shuffled; score_change is the mean "
            "absolute change of predicted uplift, qini_drop the fall of the pooled "
            "normalised Qini (means over arms)"
        ),
        "features": cv.importance or {},
    }


def _reference(model: BootstrapUplift, data: TrainingData) -> dict[str, Any]:
    features = {}
    for spec in model.encoder_.specs:
        column = data.X[spec.name]
        features[spec.name] = (
            numeric_reference(column) if spec.kind == "numeric" else categorical_reference(column)
        )
    # The served model's own scores on the training rows: what new scores drift from.
    scores = model.predict(data.X)
    score = {str(arm): numeric_reference(scores[:, j]) for j, arm in enumerate(model.arms_)}
    return {"features": features, "score": score}


def _manifest_body(
    *,
    data: TrainingData,
    model: BootstrapUplift,
    learner: str,
    mode: str,
    scores: dict[str, float],
    cv: CrossValidated,
    base: str,
    n_bootstrap: int,
    n_splits: int,
    random_state: int,
    economics: Economics,
) -> dict[str, Any]:
    mean, low, high = cv.qini_interval
    params = model.estimator_.get_params()
    body: dict[str, Any] = jsonable(
        {
            "features": [spec.to_dict() for spec in model.encoder_.specs],
            "outcome_type": model.outcome_type_,
            "control": data.control,
            "arms": list(model.arms_),
            "learner": {
                "name": learner,
                "base": base,
                "params": params,
                "tuning": getattr(model.estimator_, "tuning_", {}),
                "bootstrap": {"n_bootstrap": n_bootstrap, "random_state": random_state},
            },
            "selection": {"mode": mode, "rule": _SELECTION_RULE, "scores": scores},
            "metrics": {
                "method": (
                    f"{n_splits}-fold cross-validation, stratified by group and outcome; "
                    "every row scored by a model that never saw it"
                ),
                "n_splits": n_splits,
                "arms": cv.metrics,
                "qini_normalized_over_folds": {"mean": mean, "low": low, "high": high},
            },
            "training_data": data_fingerprint(data),
            "segments": segments_entry(data, _in_data_order(cv, data), random_state=random_state),
            "importance": _importance_entry(cv),
            "reference": _reference(model, data),
            "economics": economics.to_dict(),
            "libraries": library_versions(),
            "created_at": utc_now(),
        }
    )
    return body


def _serving(staging: Path, form: FormBuild, n_bootstrap: int) -> dict[str, Any]:
    """The manifest's ``serving`` block; writes the compact form when one was built."""
    full = form_record(
        "full", staging / MODEL_FILE, interval="normal bootstrap", n_bootstrap=n_bootstrap
    )
    compact = {"kind": "compact", **form.record}
    if form.compiled is not None:
        save_form(form.compiled, staging / COMPACT_FILE)
        compact = form_record("compact", staging / COMPACT_FILE, **form.record)
    default = "compact" if form.compiled is not None else "full"
    return {"default": default, "forms": {"full": full, "compact": jsonable(compact)}}


def train_model(
    frame: pd.DataFrame,
    *,
    treatment: str,
    outcome: str,
    control: Any = None,
    features: Sequence[str] | None = None,
    learner: str = "auto",
    name: str,
    models_dir: Path | str,
    base: str = "gbm",
    n_bootstrap: int = 20,
    n_splits: int = 5,
    random_state: int = 0,
    sample_weight: str | None = None,
    propensity: Propensity = None,
    value: float = 1.0,
    cost: float | Mapping[str, float] = 0.0,
    progress: bool = False,
    source: str = "the data",
    threads: int | None = 1,
    source_decisions: Mapping[str, Any] | None = None,
    form_thresholds: FidelityThresholds | None = None,
    tune: bool = True,
) -> TrainingResult:
    """Train, evaluate and save a new version of the model ``name``.

    Steps: validate the table; cross-validate the learner (every candidate for
    ``learner="auto"``, keeping the best pooled out-of-fold normalised Qini); fit the
    chosen learner with bootstrap intervals on all rows; build the compact serving form
    and measure its fidelity (:func:`~service.training.forms.build_compact_form`; below
    the thresholds a warning is logged and the full form serves); write the bundle
    (model, compact form, out-of-fold predictions, report, manifest) atomically. All
    computation happens before anything is written, and a failed write leaves no
    version behind.

    Parameters
    ----------
    frame : DataFrame
        The campaign, one row per customer.
    treatment, outcome, control, features, sample_weight, propensity
        See :func:`~service.training.validate.prepare_training_data`.
    learner : {"auto", "t", "s", "x", "dr", "r", "transformed"}
    name : str
        Model name (1-64 letters, digits, ``_``, ``-``, ``.``).
    models_dir : path
        Registry root.
    base : {"gbm", "linear"}
        Base learner family.
    n_bootstrap : int
        Bootstrap refits for the prediction intervals.
    n_splits : int
        Cross-validation folds for selection and the reported metrics.
    random_state : int
        Seeds folds, learners and bootstrap.
    value, cost : float, or mapping arm -> float for ``cost``
        Value of one conversion and cost of one contact, for the report's profit curve.
    progress : bool
        Show a progress bar on standard error.
    source : str
        How to name the data in error messages (e.g. the file path).
    threads : int or None, default 1
        Threads for the numeric libraries (OpenMP, BLAS) while fitting; None leaves
        their defaults. One thread is the default because the many small fits of
        cross-validation and bootstrap run several times slower, not faster, when
        threads compete for a few (or shared) cores.
    source_decisions : mapping, optional
        Where the rows came from when they are an export of the decision log (campaign,
        window, count, SHA-256; see ``service.loop.export``); kept in the manifest under
        ``source_decisions``.
    form_thresholds : FidelityThresholds, optional
        The least fidelity the compact serving form must show against the full form
        (default: Qini within 0.01, 98% action and 99% do-not-contact agreement).
    tune : bool, default True
        Choose the base models' capacity by held-out loss inside each fit (see
        ``service.uplift._tuning``); False keeps the fixed default settings.

    Returns
    -------
    TrainingResult

    References
    ----------
    Radcliffe, N. J. (2007). Using control groups to target on predicted lift. Direct
    Marketing Analytics Journal, 1, 14-21 (Qini coefficient used for selection).
    """
    names = _candidates(learner)
    registry = ModelRegistry(models_dir)
    check_name(name, lookup=False)
    data = prepare_training_data(
        frame,
        treatment=treatment,
        outcome=outcome,
        control=control,
        features=features,
        sample_weight=sample_weight,
        propensity=propensity,
        n_splits=n_splits,
        source=source,
    )
    economics = Economics.build(value, cost, data.arms)
    total = len(names) * n_splits + 2
    limits = threadpool_limits(limits=threads) if threads is not None else nullcontext()
    with limits, tqdm(total=total, disable=not progress, file=sys.stderr, unit="step") as bar:
        best, cv, scores = _cross_validate(names, data, base, n_splits, random_state, bar, tune)
        bar.set_description(f"fitting {best} with {n_bootstrap} bootstrap refits")
        model = BootstrapUplift(
            _learner(best, base, data, random_state, tune),
            n_bootstrap=n_bootstrap,
            random_state=random_state,
        ).fit(
            data.X,
            data.y,
            data.treatment,
            propensity=data.propensity,
            sample_weight=data.sample_weight,
        )
        bar.update()
        bar.set_description("building the compact serving form")
        form = build_compact_form(
            model, data, economics, random_state=random_state, thresholds=form_thresholds
        )
        body = _manifest_body(
            data=data,
            model=model,
            learner=best,
            mode="auto" if learner == "auto" else "fixed",
            scores=scores,
            cv=cv,
            base=base,
            n_bootstrap=n_bootstrap,
            n_splits=n_splits,
            random_state=random_state,
            economics=economics,
        )
        if source_decisions is not None:
            body["source_decisions"] = jsonable(dict(source_decisions))
        oof = OutOfFold(
            cv.oof, data.y, data.treatment, cv.fold, data.sample_weight, cv.arms, cv.control
        )
        bar.set_description("writing bundle and report")

        def build(staging: Path, version: str) -> dict[str, Any]:
            joblib.dump(model, staging / MODEL_FILE, compress=3)
            write_out_of_fold(staging / OOF_FILE, oof)
            body["serving"] = _serving(staging, form, n_bootstrap)
            write_report({**body, "name": name, "version": version}, oof, staging / REPORT_DIR)
            return body

        artifacts = {MODEL_FILE: "model", OOF_FILE: "out_of_fold"}
        if form.compiled is not None:
            artifacts[COMPACT_FILE] = "serving_form"
        version, path, manifest = registry.add_version(name, build, artifacts)
        bar.update()
    return TrainingResult(name, version, path, manifest, model)
