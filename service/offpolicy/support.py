"""Does the log support a target policy? Rows where it takes an action the log never could."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import numpy.typing as npt

__all__ = ["Support", "check_support"]

FloatArray = npt.NDArray[np.float64]


@dataclass(frozen=True)
class Support:
    """How much of a target policy's probability falls on actions the log gave probability 0.

    Attributes
    ----------
    n : rows evaluated.
    unsupported_rows : rows where the target puts probability on such an action.
    unsupported_mass : average over rows of the target probability on such actions; an
        inverse-propensity estimate silently counts that share of the policy as earning 0.
    """

    n: int
    unsupported_rows: int
    unsupported_mass: float

    @property
    def ok(self) -> bool:
        """True when the log supports every action the target policy can take."""
        return self.unsupported_rows == 0

    @property
    def message(self) -> str | None:
        """A warning sentence when support is lacking, else None."""
        if self.ok:
            return None
        share = self.unsupported_rows / self.n
        return (
            f"The log lacks support for this policy: in {self.unsupported_rows} of {self.n} "
            f"rows ({share:.1%}) it takes an action that the logging policy could never "
            f"take (logged probability 0), carrying {self.unsupported_mass:.1%} of its "
            "probability. IPS and SNIPS count those rows as if the policy earned nothing "
            "there, and DR relies on the reward model alone for them; treat the estimates "
            "as unreliable, or keep exploration on for those customers before replaying."
        )


def check_support(target_probs: FloatArray, logged_probs: FloatArray) -> Support:
    """Compare where the target policy puts probability with where the log had any.

    Parameters
    ----------
    target_probs, logged_probs : (n, n_actions) action probabilities of the target and
        of the logging policy for each logged row.
    """
    missing = (logged_probs <= 0) & (target_probs > 0)
    mass = np.where(missing, target_probs, 0.0).sum(axis=1)
    n = len(target_probs)
    return Support(
        n=n,
        unsupported_rows=int(missing.any(axis=1).sum()),
        unsupported_mass=float(mass.mean()) if n else 0.0,
    )
