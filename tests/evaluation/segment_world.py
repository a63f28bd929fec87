"""A randomized binary campaign whose true segments are known (invented for these checks).

"Step segments" design: ``tenure_months`` uniform on 0..47, ``plan`` one of sampler /
classic / family, ``spend`` and ``region`` unrelated to the effect. Response rate 0.30
without contact; the contact adds 0.20 for ``plan = family and tenure_months < 12``
(the truly persuadable), subtracts 0.15 for ``plan = sampler and tenure_months >= 24``
(the truly harmed) and does nothing for everyone else. Half the rows are contacted.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

PERSUADABLE_UPLIFT = 0.20
HARMED_UPLIFT = -0.15


def step_segments(n: int, seed: int) -> tuple[pd.DataFrame, np.ndarray, np.ndarray, np.ndarray]:
    """Features, outcome, treatment ("none"/"email") and the true uplift of each row."""
    rng = np.random.default_rng(seed)
    X = pd.DataFrame(
        {
            "tenure_months": rng.integers(0, 48, n),
            "plan": rng.choice(["sampler", "classic", "family"], n),
            "spend": rng.gamma(2.0, 10.0, n).round(2),
            "region": rng.choice(["north", "south", "east"], n),
        }
    )
    persuadable = (X["plan"] == "family").to_numpy() & (X["tenure_months"] < 12).to_numpy()
    harmed = (X["plan"] == "sampler").to_numpy() & (X["tenure_months"] >= 24).to_numpy()
    tau = np.where(persuadable, PERSUADABLE_UPLIFT, np.where(harmed, HARMED_UPLIFT, 0.0))
    contacted = rng.random(n) < 0.5
    y = (rng.random(n) < 0.30 + tau * contacted).astype(int)
    treatment = np.where(contacted, "email", "none").astype(object)
    return X, y, treatment, tau
