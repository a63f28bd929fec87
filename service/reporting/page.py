"""The HTML page of a model report: headline numbers, plots, the tables behind them."""

from __future__ import annotations

from collections.abc import Sequence
from html import escape
from typing import Any

import pandas as pd

from service.reporting.economics import Economics
from service.reporting.forms import forms_section
from service.reporting.segments import segments_section
from service.reporting.tables import ArmTables

__all__ = ["CAUTION", "render_page"]

CAUTION = (
    "Contacting people is regulated. Honour opt-outs, do-not-call registries, consent and "
    "marketing law where each customer lives, and do not target on protected attributes "
    "(or their proxies) where the law forbids it, as in credit, insurance, housing and "
    "employment. In healthcare an uplift estimate is not a clinical decision: it needs "
    "clinical validation and whatever clearance local regulation requires, and defers to "
    "licensed practitioners. Political outreach follows local election law. These figures "
    "are estimates with stated uncertainty; the people running a campaign stay responsible "
    "for it."
)

_STYLE = """
body{font-family:system-ui,-apple-system,Segoe UI,sans-serif;max-width:1100px;margin:2em auto;
padding:0 1em;color:#222;line-height:1.45}
h1{font-size:1.6em;margin-bottom:.2em}h2{margin-top:1.8em;border-bottom:1px solid #ddd}
table{border-collapse:collapse;margin:.6em 0;font-size:.88em}
th,td{border:1px solid #ddd;padding:.25em .6em;text-align:right}
th{background:#f3f6f9}td:first-child,th:first-child{text-align:left}
img{max-width:100%;border:1px solid #eee;margin:.5em 0}
.meta{color:#555}.caution{background:#fff7e6;border-left:4px solid #e0a030;padding:.6em 1em}
.big{font-size:1.15em}
"""


def _fmt(value: Any, digits: int = 4) -> str:
    if value is None or (isinstance(value, float) and value != value):
        return "–"
    if isinstance(value, bool):
        return "yes" if value else "no"
    if isinstance(value, float):
        return f"{value:.{digits}g}"
    return escape(str(value))


def _table(frame: pd.DataFrame) -> str:
    head = "".join(f"<th>{escape(str(c))}</th>" for c in frame.columns)
    rows = "".join(
        "<tr>" + "".join(f"<td>{_fmt(v)}</td>" for v in row) + "</tr>"
        for row in frame.itertuples(index=False)
    )
    return f"<table><tr>{head}</tr>{rows}</table>"


def _interval(entry: dict[str, Any]) -> str:
    return f"{_fmt(entry['estimate'])} [{_fmt(entry['low'])}, {_fmt(entry['high'])}]"


def _headline(manifest: dict[str, Any]) -> str:
    rows = []
    for arm, m in manifest["metrics"]["arms"].items():
        tops = {round(t["fraction"] * 100): _interval(t) for t in m["uplift_at_top"]}
        rows.append(
            {
                "arm": arm,
                "Qini (normalised)": m["qini_normalized"],
                "Qini": m["qini"],
                "AUUC": m["auuc"],
                **{f"uplift in top {k}% [95% CI]": v for k, v in tops.items()},
            }
        )
    frame = pd.DataFrame(rows)
    # The interval columns are preformatted text.
    head = "".join(f"<th>{escape(str(c))}</th>" for c in frame.columns)
    body = "".join(
        "<tr>"
        + "".join(f"<td>{v if isinstance(v, str) and '[' in v else _fmt(v)}</td>" for v in row)
        + "</tr>"
        for row in frame.itertuples(index=False)
    )
    return f"<table><tr>{head}</tr>{body}</table>"


def _groups(manifest: dict[str, Any]) -> str:
    groups = manifest["training_data"]["groups"]
    label = "response rate" if manifest["outcome_type"] == "binary" else "mean outcome"
    frame = pd.DataFrame(
        [{"group": k, "rows": g["rows"], label: g["outcome_mean"]} for k, g in groups.items()]
    )
    return _table(frame)


def _features(manifest: dict[str, Any]) -> str:
    rows = []
    for spec in manifest["features"]:
        seen = (
            f"{_fmt(spec['minimum'])} to {_fmt(spec['maximum'])}"
            if spec["kind"] == "numeric"
            else ", ".join(spec["categories"][:12])
            + (" …" if len(spec["categories"]) > 12 else "")
        )
        rows.append(
            {
                "feature": spec["name"],
                "kind": spec["kind"],
                "seen in training": seen,
                "missing": f"{spec['missing_share']:.1%}",
            }
        )
    return _table(pd.DataFrame(rows))


def _selection(manifest: dict[str, Any]) -> str:
    selection = manifest["selection"]
    frame = pd.DataFrame(
        [
            {"learner": k, "out-of-fold Qini (normalised)": v}
            for k, v in selection["scores"].items()
        ]
    )
    how = "chosen automatically" if selection["mode"] == "auto" else "fixed by the user"
    return f"<p>Learner {how}; rule: {escape(selection['rule'])}.</p>" + _table(frame)


def _arm_section(t: ArmTables, economics: Economics, files: dict[str, str]) -> str:
    best = t.best_profit
    return (
        f"<h3>{escape(t.arm)} vs control</h3>"
        f"<p>Best cut at value {economics.value:g} and contact cost "
        f"{economics.cost[t.arm]:g}: contact the top {best['fraction']:.0%}, for an estimated "
        f"profit of {best['profit_per_1000']:.4g} per 1,000 customers.</p>"
        "<h4>Uplift by decile</h4>"
        + _table(t.deciles)
        + "<h4>Calibration</h4>"
        + _table(t.calibration)
        + "<p>Full curves: "
        + ", ".join(f'<a href="{escape(f)}">{escape(k)}</a>' for k, f in files.items())
        + "</p>"
    )


def render_page(
    manifest: dict[str, Any],
    tables: Sequence[ArmTables],
    economics: Economics,
    figures: Sequence[str],
    csv_files: dict[str, dict[str, str]],
) -> str:
    """The whole report as one HTML document (images and CSVs referenced by file name)."""
    name, version = escape(str(manifest["name"])), escape(str(manifest["version"]))
    learner = manifest["learner"]
    plots = "".join(f'<img src="{escape(f)}" alt="{escape(f)}">' for f in figures)
    arms = "".join(_arm_section(t, economics, csv_files[t.arm]) for t in tables)
    return f"""<!doctype html>
<html lang="en"><head><meta charset="utf-8"><title>{name} {version} – upshot report</title>
<style>{_STYLE}</style></head><body>
<h1>{name} <small>{version}</small></h1>
<p class="meta">Created {escape(str(manifest["created_at"]))} · learner
<b>{escape(str(learner["name"]))}</b> on {escape(str(learner["base"]))} base models ·
{escape(str(manifest["outcome_type"]))} outcome · control group
<b>{escape(str(manifest["control"]))}</b> · {manifest["training_data"]["rows"]} rows</p>
<div class="caution"><b>Responsible use.</b> {escape(CAUTION)}</div>
<h2>How well the model ranks customers by uplift</h2>
<p>Every figure below is measured on out-of-fold predictions:
{escape(manifest["metrics"]["method"])}.
A normalised Qini of 0 is random targeting and 1 the best achievable ordering.</p>
{_headline(manifest)}
{plots}
<h2>Per arm: tables behind the plots</h2>
{arms}
{forms_section(manifest)}
{segments_section(manifest)}
<h2>Training data</h2>
{_groups(manifest)}
<p class="meta">Fingerprint (SHA-256): {escape(manifest["training_data"]["sha256"])}</p>
<h2>Features</h2>
{_features(manifest)}
<h2>Learner selection</h2>
{_selection(manifest)}
</body></html>
"""
