"""The glue between a request and a decision, free of HTTP.

Data flows one way: request features -> validation against the model's feature schema
(:mod:`~service.scoring.features`) -> model (compiled fast path when available,
:mod:`~service.scoring.estimates`) -> policy (:func:`service.policy.decide` and
:func:`service.policy.rank`) -> decision records -> decision log -> response
(:mod:`~service.scoring.engine`, :mod:`~service.scoring.committer`,
:mod:`~service.scoring.views`). :mod:`~service.scoring.catalog` binds each campaign to
its verified model version. The HTTP layer, the batch endpoint and the ranked list all
share this path.
"""

from __future__ import annotations

from service.scoring.batches import RankedChunks, rank_batch, run_work, score_batch
from service.scoring.catalog import (
    BoundCampaign,
    Catalog,
    bind_campaigns,
    load_catalog,
    readiness_problems,
)
from service.scoring.committer import Committer
from service.scoring.engine import (
    CHUNK_ROWS,
    Decided,
    Ranking,
    Single,
    decide_chunk,
    decide_one,
    emit_columns,
    rank_chunks,
    refuse_duplicates,
    resolve_values,
)
from service.scoring.estimates import Estimates, ServableModel, servable
from service.scoring.features import FeatureSchema, FeatureTable, InvalidFeatures
from service.scoring.views import column_body, column_part, decision_rows, ranked_list

__all__ = [
    "CHUNK_ROWS",
    "BoundCampaign",
    "Catalog",
    "Committer",
    "Decided",
    "Single",
    "Estimates",
    "FeatureSchema",
    "FeatureTable",
    "InvalidFeatures",
    "ServableModel",
    "bind_campaigns",
    "RankedChunks",
    "Ranking",
    "column_body",
    "column_part",
    "decide_chunk",
    "decide_one",
    "decision_rows",
    "emit_columns",
    "load_catalog",
    "rank_batch",
    "rank_chunks",
    "ranked_list",
    "readiness_problems",
    "refuse_duplicates",
    "resolve_values",
    "run_work",
    "score_batch",
    "servable",
]
