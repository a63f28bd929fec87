"""Drift over a recent window of the decision log, against the serving bundle's reference."""

from __future__ import annotations

import numpy as np

from service.loop.logged import LoggedDecisions
from service.monitoring.drift import DriftReport, compare_to_reference
from service.registry import LoadedBundle

__all__ = ["log_drift"]


def log_drift(
    logged: LoggedDecisions, bundle: LoadedBundle, *, last: int | None = None
) -> DriftReport:
    """PSI of each feature (all decisions in the window) and of each arm's score (the
    decisions this bundle scored) against the bundle's training reference.

    ``last`` keeps only the most recent decisions of the window.
    """
    if last is not None and last < len(logged):
        logged = logged.subset(np.arange(len(logged) - last, len(logged)))
    reference = bundle.manifest.get("reference", {})
    names = list(reference.get("features", {})) if isinstance(reference, dict) else []
    features = logged.features().reindex(columns=names) if names else logged.features()
    own = np.array(logged.models()) == f"{bundle.name}:{bundle.version}"
    scores = {arm: logged.tau[own, j] for j, arm in enumerate(logged.arms)} if own.any() else {}
    return compare_to_reference(reference, features, scores)
