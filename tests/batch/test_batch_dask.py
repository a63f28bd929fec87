"""``--dask``: a real LocalCluster (two worker processes) gives the single-process output.

The workers read and decide the parts; the client logs and writes. Row for row, the
output must equal the single-process run on the same audience, for scores and for a
ranked list whose cut is computed over every part.
"""

from __future__ import annotations

from pathlib import Path

import pandas as pd
import pytest
from batch_support import CAMPAIGN, audience

from service.batch import Audience, score_file
from service.batch.cluster import dask_runner
from service.decisions import DecisionLog
from service.scoring import BoundCampaign


@pytest.mark.slow  # a cluster of two worker processes starts in ~20-40 s on a busy machine
def test_local_cluster_output_equals_single_process(bound: BoundCampaign, tmp_path: Path) -> None:
    data = tmp_path / "audience.parquet"
    audience(3000, seed=31).to_parquet(data, row_group_size=250, index=False)
    shape = Audience(data, chunk_rows=250, part_rows=500)  # six parts
    runs = {}
    with DecisionLog.open(tmp_path / "one.sqlite3") as log:
        for mode in ("score", "rank"):
            out = tmp_path / f"one-{mode}.parquet"
            score_file(bound, shape, out, log, rank=mode == "rank", budget=60.0)
            runs[("one", mode)] = pd.read_parquet(out)
    with (
        DecisionLog.open(tmp_path / "dask.sqlite3") as log,
        dask_runner("local", bound, shape, workers=2) as runner,
    ):
        assert len(runner.client.scheduler_info()["workers"]) == 2  # type: ignore[attr-defined]
        for mode in ("score", "rank"):
            out = tmp_path / f"dask-{mode}.parquet"
            summary = score_file(bound, shape, out, log, rank=mode == "rank", budget=60.0,
                                 runner=runner)  # fmt: skip
            assert summary.logged == 3000
            runs[("dask", mode)] = pd.read_parquet(out)
        logged = sorted(r.decision_id for r in log.iter_decisions(CAMPAIGN))
    for mode in ("score", "rank"):
        pd.testing.assert_frame_equal(runs[("dask", mode)], runs[("one", mode)])
    ids = sorted([*runs[("one", "score")]["decision_id"], *runs[("one", "rank")]["decision_id"]])
    assert logged == ids
    ranked = runs[("one", "rank")]
    assert ranked["rank"].notna().sum() > 0
    assert ranked.loc[ranked["rank"].notna(), "cost"].sum() <= 60.0 + 1e-9
