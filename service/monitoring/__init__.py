"""Monitoring a served model: drift of features and scores by population stability index.

PSI thresholds 0.1 (watch) and 0.25 (act) are common practice with no published source.
"""

from __future__ import annotations

from service.monitoring.drift import DriftItem, DriftReport, binned, compare_to_reference
from service.monitoring.gauges import DriftCollector
from service.monitoring.psi import PSI_ACT, PSI_WATCH, SHARE_FLOOR, psi, psi_level
from service.monitoring.recent import log_drift

__all__ = [
    "PSI_ACT",
    "PSI_WATCH",
    "SHARE_FLOOR",
    "DriftCollector",
    "DriftItem",
    "DriftReport",
    "binned",
    "compare_to_reference",
    "log_drift",
    "psi",
    "psi_level",
]
