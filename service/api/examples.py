"""Request and response examples of the OpenAPI document, set in the demo (``upshot demo``).

Larkspur Tea Club is the project's invented tea subscription; the campaign, model and
features below are those of ``campaigns/larkspur.toml`` and the demo model, so "Try it
out" in ``/docs`` works against ``upshot demo`` without edits.
"""

from __future__ import annotations

from typing import Any

__all__ = [
    "BATCH_COLUMNS",
    "BATCH_ROWS",
    "DECISION",
    "DEMO_CAMPAIGN",
    "DEMO_MODEL",
    "OUTCOMES",
    "PROMOTE",
    "RANK",
    "RANKED_LIST",
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

# Answers of the demo model (larkspur v0001 as `upshot demo` trains it) to SCORE and RANK,
# rounded to 4 decimals; another model version gives other numbers.
DECISION: dict[str, Any] = {
    "decision_id": "164edfc98b8fb65a5030dd9b15245d50",
    "customer_id": "LTC-000123",
    "campaign": "larkspur-renewal",
    "model": {"name": "larkspur", "version": "v0001"},
    "policy_hash": "8f28d66c16e09e003880bdd7735a27a3fc9003c7be4d0c28896ad7f87945e63a",
    "action": "email",
    "arm": "email",
    "uplift": 0.2865,
    "uplift_low": 0.208,
    "uplift_high": 0.365,
    "confidence": 0.9,
    "outcome_without_contact": 0.3025,
    "outcome_with_arm": 0.589,
    "expected_value": 11.0584,
    "do_not_contact": False,
    "explored": False,
    "holdout": False,
    "propensity": 0.87,
    "reasons": ["best_ev"],
    "arms": [
        {
            "arm": "email",
            "cost": 0.4,
            "uplift": 0.2865,
            "uplift_low": 0.208,
            "uplift_high": 0.365,
            "outcome": 0.589,
            "expected_value": 11.0584,
            "do_not_contact": False,
        },
        {
            "arm": "call",
            "cost": 3.5,
            "uplift": 0.2883,
            "uplift_low": 0.2252,
            "uplift_high": 0.3514,
            "outcome": 0.5908,
            "expected_value": 8.0309,
            "do_not_contact": False,
        },
    ],
}
RANKED_LIST: dict[str, Any] = {
    "campaign": "larkspur-renewal",
    "model": {"name": "larkspur", "version": "v0001"},
    "policy_hash": "8f28d66c16e09e003880bdd7735a27a3fc9003c7be4d0c28896ad7f87945e63a",
    "capacity": 2,
    "budget": 10.0,
    "contacts": [
        {
            "rank": 1,
            "customer_id": "LTC-000123",
            "decision_id": "a0c0e72ff74e6fa675a815800e49a8e5",
            "arm": "email",
            "contact": True,
            "expected_value": 11.0584,
            "uplift": 0.2865,
            "cost": 0.4,
            "propensity": 0.87,
            "explored": False,
            "holdout": False,
        },
        {
            "rank": 2,
            "customer_id": "LTC-000124",
            "decision_id": "db7329e5c8455a02bb01c14855b53b8c",
            "arm": "email",
            "contact": False,
            "expected_value": 0.7033,
            "uplift": 0.0276,
            "cost": 0.4,
            "propensity": 0.115,
            "explored": False,
            "holdout": True,
        },
    ],
    "excluded": [
        {
            "customer_id": "LTC-000125",
            "decision_id": "a199fa466807c33deb0da95a88f59b85",
            "reason": "no_positive_value",
        }
    ],
    "totals": {
        "candidates": 3,
        "contacts": 1,
        "held_out": 1,
        "excluded": 1,
        "expected_value": 11.0584,
        "cost": 0.4,
    },
}
