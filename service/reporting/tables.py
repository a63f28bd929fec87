"""The numbers behind each plot, computed from out-of-fold predictions, one arm at a time."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np
import pandas as pd

from service.evaluation import (
    calibration_table,
    decile_table,
    perfect_qini_curve,
    profit_curve,
    qini_curve,
)
from service.registry import OutOfFold
from service.reporting.economics import Economics

__all__ = ["ArmTables", "arm_tables"]


@dataclass(frozen=True, eq=False)
class ArmTables:
    """Curves and tables of one arm against control."""

    arm: str
    qini: pd.DataFrame  # fraction, model, random, best
    deciles: pd.DataFrame
    calibration: pd.DataFrame
    profit: pd.DataFrame  # fraction, profit_per_1000
    best_profit: dict[str, float]


def _qini_frame(oof: OutOfFold, arm: Any, j: int, common: dict[str, Any]) -> pd.DataFrame:
    model = qini_curve(oof.y, oof.treatment, oof.scores[:, j], **common)
    best = perfect_qini_curve(oof.y, oof.treatment, **common)
    return pd.DataFrame(
        {
            "fraction": model.x,
            "model": model.y,
            "random": model.x * model.y[-1],
            "best": np.interp(model.x, best.x, best.y),
        }
    )


def _population(oof: OutOfFold, arm: Any) -> float:
    rows = (oof.treatment == arm) | (oof.treatment == oof.control)
    weight = np.ones(len(rows)) if oof.weight is None else oof.weight
    return float(weight[rows].sum())


def arm_tables(oof: OutOfFold, economics: Economics) -> list[ArmTables]:
    """Qini curve (with random and best lines), deciles, calibration and profit per arm.

    Profit is per 1,000 customers of the evaluated population when the top fraction is
    contacted: ``value * incremental conversions - cost * contacts``.
    """
    out = []
    for j, arm in enumerate(oof.arms):
        common: dict[str, Any] = {
            "control": oof.control,
            "arm": arm,
            "sample_weight": oof.weight,
        }
        score = oof.scores[:, j]
        curve = profit_curve(
            oof.y,
            oof.treatment,
            score,
            value=economics.value,
            cost=economics.cost[str(arm)],
            **common,
        )
        per_1000 = curve.y / _population(oof, arm) * 1000.0
        profit = pd.DataFrame({"fraction": curve.x, "profit_per_1000": per_1000})
        k = int(np.argmax(per_1000))
        out.append(
            ArmTables(
                arm=str(arm),
                qini=_qini_frame(oof, arm, j, common),
                deciles=decile_table(oof.y, oof.treatment, score, **common),
                calibration=calibration_table(oof.y, oof.treatment, score, **common),
                profit=profit,
                best_profit={"fraction": float(curve.x[k]), "profit_per_1000": float(per_1000[k])},
            )
        )
    return out
