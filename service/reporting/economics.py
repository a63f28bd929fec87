"""Value of a conversion and cost of a contact per arm, for profit curves."""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from typing import Any

from service.errors import DataError

__all__ = ["Economics"]


@dataclass(frozen=True)
class Economics:
    """``value`` of one conversion (1 when the outcome is money) and ``cost`` per arm."""

    value: float
    cost: dict[str, float]

    @classmethod
    def build(
        cls, value: float, cost: float | Mapping[str, float], arms: Sequence[Any]
    ) -> Economics:
        """One cost for every arm, or a mapping from arm label to cost."""
        if not math.isfinite(value) or value <= 0:
            raise DataError(f"value={value!r} must be a positive number (1 for money outcomes).")
        if isinstance(cost, Mapping):
            costs = {str(k): float(v) for k, v in cost.items()}
            missing = [str(a) for a in arms if str(a) not in costs]
            if missing:
                raise DataError(
                    f"No contact cost was given for arm(s) {missing}; give one per arm, e.g. "
                    + ",".join(f"{a}=0.5" for a in arms)
                    + "."
                )
        else:
            costs = {str(a): float(cost) for a in arms}
        bad = {k: v for k, v in costs.items() if not math.isfinite(v) or v < 0}
        if bad:
            raise DataError(f"Contact costs {bad} must be zero or positive numbers.")
        return cls(float(value), {str(a): costs[str(a)] for a in arms})

    @classmethod
    def from_dict(cls, data: Mapping[str, Any]) -> Economics:
        return cls(float(data["value"]), {str(k): float(v) for k, v in data["cost"].items()})

    def to_dict(self) -> dict[str, Any]:
        return {"value": self.value, "cost": dict(self.cost)}
