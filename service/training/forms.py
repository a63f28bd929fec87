"""Build the compact serving form after the final fit, and measure its fidelity.

The training rows are split at random: the spread models are fitted on three quarters
and the compact form is compared with the full form on the other quarter, which the
spread models never saw. The point estimates of both forms come from the same full-data
fit (which did see those rows), so the comparison measures what differs between the
forms, the interval width, on rows new to the part that was fitted for it. The form that
was measured is the one saved; nothing is refitted afterwards. Below the thresholds no
compact form is written, the full form serves, and the reason is logged as a warning
and recorded in the manifest.
"""

from __future__ import annotations

import logging
from dataclasses import dataclass
from typing import Any

import numpy as np

from service.errors import BundleError, DataError
from service.evaluation.fidelity import FidelityThresholds, FormEstimates, form_fidelity
from service.reporting import Economics
from service.training.validate import TrainingData
from service.uplift import BootstrapUplift
from service.uplift.compact import (
    SPREAD_PARAMS,
    bootstrap_sd,
    compact_form,
    fit_spread_models,
    interval_sd,
)
from service.uplift.compiled import CompiledUplift, compile_model

__all__ = ["FormBuild", "build_compact_form"]

logger = logging.getLogger(__name__)

HELD_OUT_SHARE = 0.25


@dataclass(frozen=True)
class FormBuild:
    """The compact form (None when refused), its manifest record, and the candidate
    that was measured (also when refused; for benchmarks, never saved)."""

    compiled: CompiledUplift | None
    record: dict[str, Any]
    candidate: CompiledUplift | None = None


def build_compact_form(
    model: BootstrapUplift,
    data: TrainingData,
    economics: Economics,
    *,
    random_state: int,
    thresholds: FidelityThresholds | None = None,
) -> FormBuild:
    """Fit the spread models, compare the compact form with the full one, decide.

    Never raises for a model that cannot have a compact form: the record says why and
    a warning is logged (``upshot train`` also prints it).
    """
    limits = thresholds or FidelityThresholds()
    method = {
        "interval": "normal, tau +/- z * exp(g_a(x)); g_a regresses the log bootstrap "
        "standard deviation of arm a on the features",
        "spread_model": {
            "kind": "histogram gradient boosting",
            "params": SPREAD_PARAMS,
            "rows": "the fit rows plus synthetic rows near them (MUNGE), labelled by the "
            "full form; rows near a do-not-contact boundary weighted up",
        },
        "held_out_share": HELD_OUT_SHARE,
    }
    try:
        full = compile_model(model, warm_up=False)
        encoded = full.encode(data.X)
        sd = bootstrap_sd(full, encoded)
        rows = np.random.default_rng(random_state).permutation(len(encoded))
        cut = int(round(len(rows) * (1 - HELD_OUT_SHARE)))
        fit_rows, held = np.sort(rows[:cut]), np.sort(rows[cut:])
        spread = fit_spread_models(full, encoded[fit_rows], seed=random_state)
        compact = compact_form(model, spread)
    except (BundleError, DataError) as err:
        return _refused(f"no compact form could be built: {err}", method, None)
    tau, _, _, high = compact.predict_interval(encoded[held], confidence=0.95)
    costs = np.array([economics.cost[str(arm)] for arm in full.arms_], dtype=float)
    full_tau = full.predict_interval(encoded[held], confidence=0.95)[0]
    weight = None if data.sample_weight is None else np.asarray(data.sample_weight)[held]
    try:
        fidelity = form_fidelity(
            FormEstimates(full_tau, sd[held]),
            FormEstimates(tau, interval_sd(tau, high, 0.95)),
            y=np.asarray(data.y)[held],
            treatment=np.asarray(data.treatment, dtype=object)[held],
            arms=full.arms_,
            control=full.control_,
            value=economics.value,
            costs=costs,
            sample_weight=weight,
            thresholds=limits,
        )
    except DataError as err:  # e.g. a held-out quarter with no outcome variation
        return _refused(f"fidelity could not be measured: {err}", method, None)
    fidelity["held_out_rows"] = len(held)
    if not fidelity["passed"]:
        reason = "fidelity below the thresholds: " + "; ".join(fidelity["failures"])
        return _refused(reason, method, fidelity, compact)
    record = {"status": "built", "method": method, "fidelity": fidelity}
    return FormBuild(compact, record, compact)


def _refused(
    reason: str,
    method: dict[str, Any],
    fidelity: dict[str, Any] | None,
    candidate: CompiledUplift | None = None,
) -> FormBuild:
    message = f"The compact serving form was refused and the full form will serve: {reason}"
    logger.warning("%s", message)
    record = {"status": "refused", "reason": reason, "method": method}
    if fidelity is not None:
        record["fidelity"] = fidelity
    return FormBuild(None, record, candidate)
