"""The report's serving-form section: which form serves, and how faithful it is."""

from __future__ import annotations

from html import escape
from typing import Any

__all__ = ["forms_section"]


def _pct(value: Any) -> str:
    return "–" if value is None else f"{value:.2%}"


def _fidelity(fidelity: dict[str, Any]) -> str:
    limits = fidelity["thresholds"]
    qini = "".join(
        f"<tr><td>{escape(arm)}</td><td>{q['full']:.4f}</td><td>{q['served']:.4f}</td>"
        f"<td>{q['difference']:+.4f}</td></tr>"
        for arm, q in fidelity["qini"].items()
    )
    levels = "".join(
        f"<tr><td>{level['confidence']:g}</td><td>{_pct(level['action_agreement'])}</td>"
        f"<td>{_pct(level['dnc_agreement'])}</td><td>{_pct(level['arm_flag_agreement'])}</td>"
        f"<td>{_pct(level['dnc_share_full'])}</td><td>{_pct(level['dnc_share_served'])}</td></tr>"
        for level in fidelity["levels"]
    )
    ratio = fidelity["sd_ratio_quantiles"]
    return (
        f"<p>Compared on {fidelity.get('held_out_rows', fidelity['rows'])} training rows the "
        "spread model never saw, at value "
        f"{fidelity['value']:g}, costs {escape(str(fidelity['costs']))} and do-not-contact "
        f"margin {fidelity['margin']:g}. Thresholds: Qini within "
        f"{limits['qini_difference']:g}, actions agreeing on at least "
        f"{limits['action_agreement']:.0%} and do-not-contact flags on at least "
        f"{limits['dnc_agreement']:.0%} of rows, at every confidence level.</p>"
        "<table><tr><th>arm</th><th>Qini (normalised), full</th><th>compact</th>"
        f"<th>difference</th></tr>{qini}</table>"
        "<table><tr><th>one-sided confidence</th><th>greedy action agrees</th>"
        "<th>customer do-not-contact agrees</th><th>arm flags agree</th>"
        "<th>flagged, full</th><th>flagged, compact</th></tr>"
        f"{levels}</table>"
        f"<p>Largest point difference {fidelity['point_max_abs_difference']:.1e}; interval "
        "width compact / full, 5%, 50%, 95% quantiles: "
        + ", ".join("–" if v is None else f"{v:.2f}" for v in ratio.values())
        + ".</p>"
    )


def forms_section(manifest: dict[str, Any]) -> str:
    """HTML for the manifest's ``serving`` block (empty for a bundle without one)."""
    serving = manifest.get("serving", {})
    compact = serving.get("forms", {}).get("compact")
    if not isinstance(compact, dict):
        return ""
    default = escape(str(serving.get("default", "full")))
    built = compact.get("status") == "built"
    head = (
        "<p>The service scores with the <b>compact</b> form by default: the model fitted on "
        "all rows (the same point estimates as the full model) and, for the interval, a "
        "small model of the bootstrap standard deviation. The full form (every bootstrap "
        "refit) stays available (<code>upshot serve --form full</code>); replay uses the "
        "full form.</p>"
        if built
        else "<p><b>No compact form was made for this version; the full form serves.</b> "
        f"Reason: {escape(str(compact.get('reason', 'unknown')))}</p>"
    )
    fidelity = compact.get("fidelity")
    body = _fidelity(fidelity) if isinstance(fidelity, dict) else ""
    return f"<h2>Serving form: {default}</h2>{head}{body}"
