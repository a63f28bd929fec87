"""Latent response groups: the binary designs draw a group per person, then an outcome.

Each person belongs to one of four response groups with probabilities given by a softmax
of feature functions; each group has a response probability per label. The true
response probability given the features is the membership-weighted mix, and the true
uplift is its difference between an arm and control.
"""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np
import numpy.typing as npt
import pandas as pd

from service.simulation._draw import FloatArray, _draw_index, _softmax
from service.simulation.campaign import Label, SimulatedCampaign

RESPONSE_GROUPS = ("persuadable", "sure_thing", "lost_cause", "sleeping_dog")


def _mixture_campaign(
    rng: np.random.Generator,
    *,
    X: pd.DataFrame,
    logits: FloatArray,
    response: FloatArray,
    labels: Sequence[Label],
    shares: FloatArray,
    name: str,
    ids: npt.NDArray[np.str_] | None = None,
    outcome_name: str = "outcome",
) -> SimulatedCampaign:
    """Assemble a binary campaign.

    ``logits`` is (n, 4) in the order of ``RESPONSE_GROUPS``; ``response`` holds the response
    probability of each group under each label, shape (4, 1 + k) or (n, 4, 1 + k);
    ``shares`` are the randomized assignment probabilities of ``labels``.
    """
    n = len(X)
    membership = _softmax(logits)
    response = np.broadcast_to(response, (n, len(RESPONSE_GROUPS), len(labels)))
    truth = np.einsum("ng,nga->na", membership, response)
    group = _draw_index(rng, membership)
    propensity_matrix = np.broadcast_to(shares, (n, len(labels))).copy()
    assigned = _draw_index(rng, propensity_matrix)
    rows = np.arange(n)
    y = (rng.random(n) < response[rows, group, assigned]).astype(np.float64)
    return SimulatedCampaign(
        X=X,
        treatment=np.asarray(labels)[assigned],
        y=y,
        tau=truth[:, 1:] - truth[:, :1],
        mu0=truth[:, 0].copy(),
        propensity=propensity_matrix[rows, assigned],
        propensity_matrix=propensity_matrix,
        control=labels[0],
        arms=tuple(labels[1:]),
        outcome_type="binary",
        name=name,
        groups=np.asarray(RESPONSE_GROUPS)[group],
        ids=ids,
        outcome_name=outcome_name,
    )
