"""Model reports: an HTML page with PNG plots (Qini curve, uplift by decile, calibration,
profit curve) and the CSV tables behind them, all from out-of-fold predictions."""

from __future__ import annotations

from service.reporting.build import write_report
from service.reporting.economics import Economics
from service.reporting.page import CAUTION
from service.reporting.tables import ArmTables, arm_tables

__all__ = ["CAUTION", "ArmTables", "Economics", "arm_tables", "write_report"]
