"""Request examples of the OpenAPI document, set in the demo (``upshot demo``).

Larkspur Tea Club is the project's invented tea subscription; the campaign, model and
features below are those of ``campaigns/larkspur.toml`` and the demo model, so "Try it
out" in ``/docs`` works against ``upshot demo`` without edits.
"""

from __future__ import annotations

from typing import Any

__all__ = [
    "BATCH_COLUMNS",
    "BATCH_ROWS",
    "DEMO_CAMPAIGN",
    "DEMO_MODEL",
    "OUTCOMES",
    "PROMOTE",
    "RANK",
    "SCORE",
]

DEMO_CAMPAIGN = "larkspur-renewal"
DEMO_MODEL = "larkspur"

_FEATURES: list[dict[str, Any]] = [
    {"tenure_months": 7, "monthly_spend": 22.28, "cups_logged_last_30d": 13,
     "support_tickets_90d": 0, "plan": "classic", "region": "west",
     "signup_channel": "market_stall"},
    {"tenure_months": 12, "monthly_spend": 12.8, "cups_logged_last_30d": 4,
     "support_tickets_90d": 0, "plan": "sampler", "region": "north", "signup_channel": "app"},
    {"tenure_months": 39, "monthly_spend": None, "cups_logged_last_30d": 6,
     "support_tickets_90d": 2, "plan": "sampler", "region": "west",
     "signup_channel": "referral"},
]  # fmt: skip
_IDS = ["LTC-000123", "LTC-000124", "LTC-000125"]

SCORE = {"campaign": DEMO_CAMPAIGN, "customer": {"id": _IDS[0], "features": _FEATURES[0]}}
BATCH_ROWS = {
    "campaign": DEMO_CAMPAIGN,
    "customers": [{"id": i, "features": f} for i, f in zip(_IDS, _FEATURES, strict=True)],
}
BATCH_COLUMNS = {
    "campaign": DEMO_CAMPAIGN,
    "columns": {"id": _IDS, **{name: [f[name] for f in _FEATURES] for name in _FEATURES[0]}},
}
RANK = {**BATCH_ROWS, "capacity": 2, "budget": 10.0}
PROMOTE = {"version": "v0001", "reason": "higher out-of-fold Qini than the champion"}
OUTCOMES = {
    "outcomes": [
        {"decision_id": "665879b6e7814fddddb0b27ceb150b0b", "outcome": 1,
         "observed_at": "2026-03-02T10:00:00Z"},
        {"decision_id": "d13f2c7bdaf066e91a0c4f0b2a5e7c11", "outcome": 0},
    ]
}  # fmt: skip
