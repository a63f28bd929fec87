"""A PNG of a campaign's realized lift, drawn with matplotlib's Agg backend (no display)."""

from __future__ import annotations

from pathlib import Path
from typing import Any

from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.figure import Figure

from service.loop.lift import LiftReport
from service.offpolicy import Estimate

__all__ = ["plot_lift"]

_MAIN, _GREY, _GOOD = "#1f5f8b", "#8a8a8a", "#3b8f4f"


def _bars(ax: Any, names: list[str], estimates: list[Estimate], colors: list[str]) -> None:
    x = list(range(len(names)))
    values = [e.value for e in estimates]
    errors = [[e.value - e.low for e in estimates], [e.high - e.value for e in estimates]]
    ax.bar(x, values, color=colors, alpha=0.8)
    ax.errorbar(x, values, yerr=errors, fmt="none", ecolor="black", capsize=4)
    ax.set_xticks(x)
    ax.set_xticklabels(names, rotation=15, fontsize=8)
    ax.axhline(0, color=_GREY, lw=0.8)


def plot_lift(report: LiftReport, path: Path | str) -> Path:
    """Write a two-panel PNG: lift per targeted contact, and net value per decision.

    Left: contacted minus held-out outcome among the targeted, and the policy's lift per
    decision over contacting no one. Right: net value per decision of the policy as run
    (observed) and IPS estimates for contacting no one and everyone through each arm.
    Whiskers are the report's confidence intervals.
    """
    lift = report.lift
    fig = Figure(figsize=(10, 4), dpi=100)
    FigureCanvasAgg(fig)
    left, right = fig.subplots(1, 2)
    names, values = [], []
    if lift.targeted is not None:
        names.append("contacted vs holdout\n(per contact)")
        values.append(lift.targeted.difference)
    names.append("policy vs no one\n(per decision)")
    values.append(lift.lift)
    _bars(left, names, values, [_MAIN] * len(names))
    left.set_ylabel("lift in outcome")
    left.set_title("realized lift", fontsize=10)
    alt_names = ["policy (observed)"] + [a.name for a in lift.alternatives.values()]
    alt_values = [lift.policy_net_value] + [a.net_value.ips for a in lift.alternatives.values()]
    colors = [_GOOD] + [_GREY] * (len(alt_values) - 1)
    _bars(right, alt_names, alt_values, colors)
    right.set_ylabel("net value per decision (IPS)")
    right.set_title("policy vs simple alternatives", fontsize=10)
    level = f"{lift.confidence:.0%}"
    fig.suptitle(
        f"{report.campaign}: {report.with_outcome} decisions with outcomes ({level} intervals)",
        fontsize=11,
    )
    fig.tight_layout()
    target = Path(path)
    target.parent.mkdir(parents=True, exist_ok=True)
    fig.savefig(target, format="png")
    return target
