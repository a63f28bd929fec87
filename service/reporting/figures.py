"""PNG plots of one model version, drawn with matplotlib's Agg backend (no display)."""

from __future__ import annotations

from collections.abc import Callable, Sequence
from pathlib import Path
from typing import Any

import numpy as np
from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.figure import Figure

from service.reporting.tables import ArmTables

__all__ = ["FIGURES", "draw_all"]

_MODEL, _RANDOM, _BEST, _BAND = "#1f5f8b", "#8a8a8a", "#3b8f4f", "#c7d9e8"
Panel = Callable[[Any, ArmTables], None]


def _qini(ax: Any, t: ArmTables) -> None:
    q = t.qini
    ax.plot(q["fraction"], q["best"], color=_BEST, lw=1.2, ls="--", label="best achievable")
    ax.plot(q["fraction"], q["model"], color=_MODEL, lw=2, label="model (out-of-fold)")
    ax.plot(q["fraction"], q["random"], color=_RANDOM, lw=1.2, ls=":", label="random targeting")
    ax.set_xlabel("fraction of customers targeted")
    ax.set_ylabel("incremental outcomes")
    ax.legend(loc="best", fontsize=8)


def _deciles(ax: Any, t: ArmTables) -> None:
    d = t.deciles
    err = np.vstack([d["uplift"] - d["uplift_low"], d["uplift_high"] - d["uplift"]])
    ax.bar(d["bin"], d["uplift"], color=_BAND, edgecolor=_MODEL, label="observed uplift")
    ax.errorbar(d["bin"], d["uplift"], yerr=err, fmt="none", ecolor=_MODEL, capsize=3)
    ax.plot(d["bin"], d["predicted_uplift"], "o", color="#b5442c", label="predicted uplift")
    ax.axhline(0, color=_RANDOM, lw=0.8)
    ax.set_xticks(list(d["bin"]))
    ax.set_xlabel("score decile (1 = highest predicted uplift)")
    ax.set_ylabel("uplift (treated minus control)")
    ax.legend(loc="best", fontsize=8)


def _calibration(ax: Any, t: ArmTables) -> None:
    c = t.calibration.dropna(subset=["observed_uplift"])
    err = np.vstack(
        [c["observed_uplift"] - c["observed_low"], c["observed_high"] - c["observed_uplift"]]
    )
    ax.errorbar(
        c["predicted_uplift"], c["observed_uplift"], yerr=err, fmt="o", color=_MODEL, capsize=3
    )
    values = np.concatenate([c["predicted_uplift"], c["observed_low"], c["observed_high"]])
    low, high = float(np.nanmin(values)), float(np.nanmax(values))
    ax.plot([low, high], [low, high], color=_RANDOM, ls=":", label="perfect calibration")
    ax.set_xlabel("predicted uplift (bin mean)")
    ax.set_ylabel("observed uplift")
    ax.legend(loc="best", fontsize=8)


def _profit(ax: Any, t: ArmTables) -> None:
    p = t.profit
    ax.plot(p["fraction"], p["profit_per_1000"], color=_MODEL, lw=2)
    ax.axhline(0, color=_RANDOM, lw=0.8)
    best = t.best_profit
    ax.plot([best["fraction"]], [best["profit_per_1000"]], "o", color="#b5442c")
    ax.annotate(
        f"best: top {best['fraction']:.0%}",
        (best["fraction"], best["profit_per_1000"]),
        textcoords="offset points",
        xytext=(-80 if best["fraction"] > 0.6 else 6, -14),
        fontsize=8,
    )
    ax.set_xlabel("fraction of customers contacted")
    ax.set_ylabel("profit per 1,000 customers")


FIGURES: dict[str, tuple[str, Panel]] = {
    "qini.png": ("Qini curve", _qini),
    "deciles.png": ("Uplift by decile (95% intervals)", _deciles),
    "calibration.png": ("Calibration", _calibration),
    "profit.png": ("Profit curve", _profit),
}


def _draw(path: Path, title: str, panel: Panel, tables: Sequence[ArmTables]) -> None:
    # Fixed margins: a layout engine would double the drawing time.
    figure = Figure(figsize=(5.2 * len(tables), 3.8))
    figure.subplots_adjust(
        left=0.6 / (5.2 * len(tables)) + 0.04, right=0.98, bottom=0.14, top=0.9, wspace=0.28
    )
    FigureCanvasAgg(figure)
    axes = figure.subplots(1, len(tables), squeeze=False)[0]
    for ax, t in zip(axes, tables, strict=True):
        panel(ax, t)
        ax.set_title(f"{title}: {t.arm} vs control", fontsize=10)
        ax.grid(alpha=0.3)
    # No software/date metadata, so the same numbers give the same bytes.
    figure.savefig(path, dpi=100, metadata={"Software": None})


def draw_all(directory: Path, tables: Sequence[ArmTables]) -> list[str]:
    """Write every figure into ``directory``; return the file names."""
    for file, (title, panel) in FIGURES.items():
        _draw(directory / file, title, panel, tables)
    return list(FIGURES)
