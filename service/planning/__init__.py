"""Planning a campaign: how many customers a pilot or a holdout needs, how long a replay.

Pure functions of the rates an analyst must settle before a campaign:
:func:`sample_size_proportions` and :func:`sample_size_amount` give the customers per
group that detect an uplift at a given power and significance, :func:`replay_volume`
the logged decisions a replay needs to tell a better challenger.
"""

from __future__ import annotations

from service.planning.power import GroupSizes, sample_size_amount, sample_size_proportions
from service.planning.replay import ReplayVolume, replay_volume

__all__ = [
    "GroupSizes",
    "ReplayVolume",
    "replay_volume",
    "sample_size_amount",
    "sample_size_proportions",
]
