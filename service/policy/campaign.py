"""A campaign's decision policy: arms and costs, value, thresholds, opt-outs, salt."""

from __future__ import annotations

import hashlib
import math
import re
from collections.abc import Iterable, Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np
import numpy.typing as npt
import orjson

from service.errors import PolicyError

__all__ = ["NO_CONTACT", "ArmCost", "Campaign", "policy_hash"]

NO_CONTACT = "none"
"""Label of the action "do not contact"; no arm may use it."""

_NAME = re.compile(r"^[A-Za-z0-9][A-Za-z0-9_.-]{0,127}$")


@dataclass(frozen=True)
class ArmCost:
    """A contact channel of a campaign and what one contact through it costs."""

    name: str
    cost: float


@dataclass(frozen=True)
class Campaign:
    """The policy of one campaign, validated on construction.

    Every field maps to the TOML key of the same name (see ``load_campaigns``); ``hash``
    is the :func:`policy_hash` of the whole definition, opt-out list and salt included,
    and is recorded with every decision the policy makes. A campaign without ``model``
    is a randomized *pilot*: each customer's action is drawn at ``pilot_shares`` (one
    share per action, no contact first; default equal), see :mod:`service.policy.pilot`.
    """

    id: str
    model: str | None
    arms: tuple[ArmCost, ...]
    salt: str
    model_version: str | None = None
    value: float = 1.0
    exploration: float = 0.0
    holdout: float = 0.0
    capacity: int | None = None
    confidence: float = 0.90
    dnc_margin: float = 0.0
    suppression: frozenset[str] = frozenset()
    pilot_shares: tuple[float, ...] | None = None
    hash: str = field(init=False, repr=False, compare=False)
    _costs: npt.NDArray[np.float64] = field(init=False, repr=False, compare=False)

    def __post_init__(self) -> None:
        _check_campaign(self)
        object.__setattr__(self, "hash", policy_hash(self))
        costs = np.array([arm.cost for arm in self.arms], dtype=np.float64)
        costs.setflags(write=False)  # shared by every request; nobody may change it
        object.__setattr__(self, "_costs", costs)

    @property
    def is_pilot(self) -> bool:
        """No model: actions are drawn at random at the pilot shares."""
        return self.model is None

    def shares(self) -> tuple[float, ...]:
        """Pilot share of each action (no contact, then the arms); equal by default."""
        if self.pilot_shares is not None:
            return self.pilot_shares
        return tuple(1.0 / (len(self.arms) + 1) for _ in range(len(self.arms) + 1))

    @property
    def arm_names(self) -> tuple[str, ...]:
        """Arm labels in declaration order (action k is ``arm_names[k - 1]``)."""
        return tuple(arm.name for arm in self.arms)

    @property
    def costs(self) -> npt.NDArray[np.float64]:
        """Contact cost per arm, aligned with :attr:`arm_names` (read-only)."""
        return self._costs

    def action_labels(self) -> tuple[str, ...]:
        """Labels of the actions 0..K: ``"none"`` then the arms."""
        return (NO_CONTACT, *self.arm_names)

    def opted_out(self, customer_ids: Iterable[object]) -> npt.NDArray[np.bool_]:
        """True where a customer id (compared as text) is on the opt-out list."""
        suppressed = self.suppression
        return np.array([str(i) in suppressed for i in customer_ids], dtype=bool)

    def arm_columns(self, model_arms: Sequence[str]) -> npt.NDArray[np.intp]:
        """Column of each campaign arm in a model's per-arm predictions.

        Raises :class:`PolicyError` naming the arm when the model does not know it.
        """
        known = {str(arm): k for k, arm in enumerate(model_arms)}
        missing = [name for name in self.arm_names if name not in known]
        if missing:
            raise PolicyError(
                f"Campaign {self.id!r}: arm(s) {missing} are not arms of model "
                f"{self.model!r} (it knows {list(known)}); rename the arms under "
                f"[campaigns.{self.id}.arms] or pin a model that was trained on them."
            )
        return np.array([known[name] for name in self.arm_names], dtype=np.intp)

    def describe(self) -> dict[str, Any]:
        """Public summary for listings: everything but the salt and the opt-out ids."""
        return {
            "id": self.id,
            "model": self.model,
            "model_version": self.model_version,
            "arms": {arm.name: arm.cost for arm in self.arms},
            "value": self.value,
            "exploration": self.exploration,
            "holdout": self.holdout,
            "capacity": self.capacity,
            "confidence": self.confidence,
            "dnc_margin": self.dnc_margin,
            "suppressed": len(self.suppression),
            "pilot_shares": (
                dict(zip(self.action_labels(), self.shares(), strict=True))
                if self.is_pilot
                else None
            ),
            "policy_hash": self.hash,
        }


def policy_hash(campaign: Campaign) -> str:
    """SHA-256 (hex) of the canonical JSON of a campaign's full definition.

    Keys are sorted, numbers are floats, and the opt-out ids are sorted, so the hash
    changes exactly when something that can change a decision changes.
    """
    definition: dict[str, Any] = {
        "id": campaign.id,
        "model": campaign.model,
        "model_version": campaign.model_version,
        "arms": [[arm.name, float(arm.cost)] for arm in campaign.arms],
        "salt": campaign.salt,
        "value": float(campaign.value),
        "exploration": float(campaign.exploration),
        "holdout": float(campaign.holdout),
        "capacity": campaign.capacity,
        "confidence": float(campaign.confidence),
        "dnc_margin": float(campaign.dnc_margin),
        "suppression": sorted(campaign.suppression),
    }
    if campaign.is_pilot:  # only pilots carry the key, so other campaigns keep their hash
        definition["pilot_shares"] = [float(x) for x in campaign.shares()]
    return hashlib.sha256(orjson.dumps(definition, option=orjson.OPT_SORT_KEYS)).hexdigest()


def _fail(campaign: str, key: str, problem: str) -> PolicyError:
    return PolicyError(f"Campaign {campaign!r}: key {key!r} {problem}")


def _check_rate(campaign: str, key: str, value: float, *, low: float, closed: bool) -> None:
    # Rates may be exactly `low` (switched off) when `closed`; all must stay below 1.
    inside = low <= value < 1.0 if closed else low < value < 1.0
    if not (math.isfinite(value) and inside):
        interval = f"[{low:g}, 1)" if closed else f"({low:g}, 1)"
        raise _fail(campaign, key, f"= {value!r} must lie in {interval}; change it in the file.")


def _check_shares(c: Campaign) -> None:
    shares = c.pilot_shares or ()
    if c.model is not None:
        raise _fail(c.id, "pilot_shares", "applies only to a pilot; remove it or remove 'model'.")
    if len(shares) != len(c.arms) + 1:
        raise _fail(c.id, "pilot_shares", f"needs one share per action {list(c.action_labels())}.")
    if not all(math.isfinite(x) and x > 0 for x in shares) or abs(sum(shares) - 1) > 1e-9:
        raise _fail(c.id, "pilot_shares", f"= {list(shares)} must be shares > 0 that sum to 1.")


def _check_campaign(c: Campaign) -> None:
    if not _NAME.match(c.id):
        raise PolicyError(
            f"Campaign id {c.id!r} is not a valid name; use 1-128 letters, digits, '.', '_' "
            "or '-', starting with a letter or digit."
        )
    for key in ("model", "salt"):
        text = getattr(c, key)
        if key == "model" and text is None:
            continue  # a pilot
        if not isinstance(text, str) or not text.strip():
            raise _fail(c.id, key, "is missing or empty; set it to a non-empty string.")
    if c.model is None and c.model_version is not None:
        raise _fail(c.id, "model_version", "pins a version but the campaign names no model.")
    if c.pilot_shares is not None:
        _check_shares(c)
    if c.model_version is not None and not c.model_version.strip():
        raise _fail(c.id, "model_version", "is empty; remove it to use the champion.")
    if not c.arms:
        raise _fail(c.id, "arms", "declares no arm; add e.g. `email = { cost = 0.40 }`.")
    seen: set[str] = set()
    for arm in c.arms:
        key = f"arms.{arm.name}"
        if arm.name == NO_CONTACT or not _NAME.match(arm.name):
            raise _fail(c.id, key, f"is not a usable arm name ({NO_CONTACT!r} means no contact).")
        if arm.name in seen:
            raise _fail(c.id, key, "is declared twice; keep one.")
        seen.add(arm.name)
        if not (math.isfinite(arm.cost) and arm.cost >= 0):
            raise _fail(c.id, f"{key}.cost", f"= {arm.cost!r} must be a finite number >= 0.")
    if not (math.isfinite(c.value) and c.value > 0):
        raise _fail(c.id, "value", f"= {c.value!r} must be a finite number > 0.")
    _check_rate(c.id, "exploration", c.exploration, low=0.0, closed=True)
    _check_rate(c.id, "holdout", c.holdout, low=0.0, closed=True)
    _check_rate(c.id, "confidence", c.confidence, low=0.5, closed=False)
    if not (math.isfinite(c.dnc_margin) and c.dnc_margin >= 0):
        raise _fail(c.id, "dnc_margin", f"= {c.dnc_margin!r} must be a finite number >= 0.")
    if c.capacity is not None and c.capacity < 1:
        raise _fail(c.id, "capacity", f"= {c.capacity!r} must be a positive integer.")
    empty = [i for i in c.suppression if not i.strip()]
    if empty:
        raise _fail(c.id, "suppression", "contains an empty id; remove it.")
