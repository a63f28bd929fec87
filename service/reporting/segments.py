"""The report's segments section: who is persuadable, in rules, and what drives the score."""

from __future__ import annotations

import re
from html import escape
from typing import Any

__all__ = ["PROTECTED_HINTS", "possibly_protected", "segments_section", "segments_text"]

# Common practice, no source: feature names that suggest a protected attribute or a
# close proxy of one. A name match is only a prompt to check; absence proves nothing.
PROTECTED_HINTS = (
    "age", "birth", "gender", "sex", "race", "ethnic", "religio", "disab", "marital",
    "pregnan", "nationality", "citizen", "orientation", "zip", "postcode", "postal",
)  # fmt: skip

SEGMENT_CAUTION = (
    "Segments describe who responded to the contact in this campaign; they are not a "
    "licence to target. Check the features listed against the protected attributes (and "
    "their proxies) that local law forbids for this use, as in credit, insurance, "
    "housing and employment, and defer to local law and licensed practice."
)


def possibly_protected(features: list[str]) -> list[str]:
    """Feature names that contain a hint of a protected attribute."""
    words = [(name, re.split(r"[^a-z]+", name.lower())) for name in features]
    return [
        name
        for name, parts in words
        if any(part.startswith(hint) for part in parts for hint in PROTECTED_HINTS)
    ]


def _num(value: Any, digits: int = 3) -> str:
    return "–" if value is None else f"{value:.{digits}g}"


def _rows(entry: dict[str, Any]) -> str:
    cells = []
    for s in entry["segments"]:
        cells.append(
            "<tr>"
            f"<td>{escape(str(s['arm']))}</td><td>{escape(s['rule'])}</td>"
            f"<td>{s['share']:.1%}</td><td>{s['n']}</td>"
            f"<td>{_num(s['uplift'])} [{_num(s['low'])}, {_num(s['high'])}]</td>"
            f"<td>{_num(s['control_rate'])}</td><td>{_num(s['predicted_uplift'])}</td>"
            f"<td>{escape(s['reading'])}</td></tr>"
        )
    head = (
        "<tr><th>arm</th><th>segment</th><th>share</th><th>rows (held out)</th>"
        "<th>observed uplift [95% CI]</th><th>control rate</th><th>predicted uplift</th>"
        "<th>reading</th></tr>"
    )
    return f"<table>{head}{''.join(cells)}</table>"


def _importance(entry: dict[str, Any]) -> str:
    rows = "".join(
        f"<tr><td>{escape(name)}</td><td>{_num(v['score_change'])}</td>"
        f"<td>{_num(v['qini_drop'])}</td></tr>"
        for name, v in entry["features"].items()
    )
    return (
        f"<p>{escape(entry['method'])}.</p><table><tr><th>feature</th>"
        f"<th>mean change of predicted uplift</th><th>Qini drop</th></tr>{rows}</table>"
    )


def segments_section(manifest: dict[str, Any]) -> str:
    """HTML of the segments section; empty for a version trained without segments."""
    entry = manifest.get("segments")
    if not entry:
        return ""
    flagged = possibly_protected(entry["features"])
    warning = (
        f" Features whose names suggest a protected attribute: <b>{escape(', '.join(flagged))}"
        "</b>."
        if flagged
        else ""
    )
    importance = manifest.get("importance")
    return (
        "<h2>Who is persuadable: honest segments</h2>"
        f"<p>{escape(entry['method'])}; depth {entry['depth']}, smallest segment "
        f"{entry['min_share']:.0%} of the rows that grew the tree. Readings: persuadables "
        "where the interval is above zero, do-not-disturb where it is below zero, sure "
        "things or lost causes where the control rate is above or below the average "
        "with no clear effect.</p>"
        + _rows(entry)
        + f'<div class="caution"><b>Responsible use.</b> {escape(SEGMENT_CAUTION)} '
        f"Features used: {escape(', '.join(entry['features']))}.{warning}</div>"
        + (
            "<h3>What drives the predicted uplift</h3>" + _importance(importance)
            if importance and importance.get("features")
            else ""
        )  # fmt: skip
    )


def segments_text(entry: dict[str, Any]) -> list[str]:
    """The segments as plain-text lines, for the command line."""
    lines = [f"segments: {entry['method']}; depth {entry['depth']}, min share "
             f"{entry['min_share']:g}"]  # fmt: skip
    for s in entry["segments"]:
        lines.append(
            f"  {s['arm']}: {s['rule']}\n"
            f"      share {s['share']:.1%}, n {s['n']}, uplift {_num(s['uplift'])} "
            f"[{_num(s['low'])}, {_num(s['high'])}], control rate {_num(s['control_rate'])}, "
            f"predicted {_num(s['predicted_uplift'])} -> {s['reading']}"
        )
    flagged = possibly_protected(entry["features"])
    lines.append(f"features used: {', '.join(entry['features'])}")
    if flagged:
        lines.append(f"check: these names suggest a protected attribute: {', '.join(flagged)}")
    lines.append(f"caution: {SEGMENT_CAUTION}")
    return lines
