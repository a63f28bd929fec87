"""``upshot score`` against the API: the same decisions, ids and propensities, row for row.

The reference is the service itself (FastAPI app, in process, column-form batch and
/v1/rank) given the same customers; the file path must not fork the decision logic.
"""

from __future__ import annotations

from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd
import pyarrow.parquet as pq
import pytest
from batch_support import CAMPAIGN, OPTED_OUT, audience, columns_body, started

from service.batch import Audience, score_file
from service.cli import main
from service.config import load_settings
from service.decisions import DecisionColumns, DecisionLog
from service.errors import DataError
from service.scoring import BoundCampaign

N = 2500
# Small chunks and parts, so that a run crosses chunk and part boundaries.
SMALL = {"chunk_rows": 300, "part_rows": 700}


def _parquet(tmp_path: Path, frame: pd.DataFrame, name: str = "audience.parquet") -> Path:
    path = tmp_path / name
    frame.to_parquet(path, row_group_size=350, index=False)
    return path


async def _api(
    models_dir: Path, campaigns_file: Path, tmp_path: Path, path: str, body: dict[str, Any]
) -> dict[str, Any]:
    settings = load_settings(
        models_dir=models_dir, campaigns_file=campaigns_file,
        decision_log=str(tmp_path / "api-decisions.sqlite3"),
    )  # fmt: skip
    with DecisionLog.open(settings.decision_log) as log:
        async with started(settings, log) as http:
            answer = await http.post(path, json=body)
    assert answer.status_code == 200, answer.text
    result: dict[str, Any] = answer.json()
    return result


@pytest.mark.anyio
async def test_scored_file_equals_the_column_form_api_answer(
    bound: BoundCampaign, models_dir: Path, campaigns_file: Path, log: DecisionLog,
    tmp_path: Path,
) -> None:  # fmt: skip
    frame = audience(N)
    out = tmp_path / "decisions.parquet"
    summary = score_file(bound, Audience(_parquet(tmp_path, frame), **SMALL), out, log)
    assert summary.rows == summary.logged == N
    got = pd.read_parquet(out)
    body = {"campaign": CAMPAIGN, "columns": columns_body(frame)}
    want = await _api(models_dir, campaigns_file, tmp_path, "/v1/score/batch", body)
    columns = want["columns"]
    assert got["customer_id"].tolist() == frame["customer_id"].tolist()
    for name in ("decision_id", "customer_id", "action", "arm", "explored", "holdout",
                 "do_not_contact"):  # fmt: skip
        assert got[name].tolist() == columns[name], name
    for name in ("propensity", "uplift", "uplift_low", "uplift_high", "expected_value",
                 "outcome_without_contact", "outcome_with_arm"):  # fmt: skip
        np.testing.assert_allclose(got[name], columns[name], rtol=0, atol=0, err_msg=name)
    assert [list(r) for r in got["reasons"]] == columns["reasons"]
    for arm, fields in want["arms"].items():
        for name, values in fields.items():
            assert got[f"{arm}_{name}"].tolist() == values, (arm, name)
    assert set(got["model_version"]) == {want["model"]["version"]}
    assert got.loc[got["customer_id"] == OPTED_OUT, "action"].item() == "none"

    # Every decision of the file is in the log, with the propensity the file shows.
    logged = {r.decision_id: r for r in log.iter_decisions(CAMPAIGN)}
    assert len(logged) == N
    sample = got.sample(50, random_state=0)
    for d_id, p in zip(sample["decision_id"], sample["propensity"], strict=True):
        assert logged[d_id].propensity == p


@pytest.mark.anyio
async def test_ranked_file_equals_the_rank_api_answer(
    bound: BoundCampaign, models_dir: Path, campaigns_file: Path, log: DecisionLog,
    tmp_path: Path,
) -> None:  # fmt: skip
    frame = audience(N, seed=22)
    out = tmp_path / "ranked.csv"
    data = _parquet(tmp_path, frame)
    summary = score_file(bound, Audience(data, **SMALL), out, log, rank=True, capacity=120)
    body = {"campaign": CAMPAIGN, "capacity": 120, "columns": columns_body(frame)}
    want = await _api(models_dir, campaigns_file, tmp_path, "/v1/rank", body)
    got = pd.read_csv(out, keep_default_na=False, na_values=[""])
    listed, excluded = got[got["rank"].notna()], got[got["rank"].isna()]
    assert summary.listed == len(listed) == len(want["contacts"]) == 120
    contacts = pd.DataFrame(want["contacts"])
    assert listed["rank"].astype(int).tolist() == contacts["rank"].tolist()
    for name in ("customer_id", "decision_id", "arm", "contact", "explored", "holdout"):
        assert listed[name].tolist() == contacts[name].tolist(), name
    for name in ("propensity", "expected_value", "uplift", "cost"):
        np.testing.assert_allclose(listed[name], contacts[name], rtol=0, atol=0, err_msg=name)
    assert excluded["customer_id"].tolist() == [e["customer_id"] for e in want["excluded"]]
    assert excluded["decision_id"].tolist() == [e["decision_id"] for e in want["excluded"]]
    assert excluded["reason"].tolist() == [e["reason"] for e in want["excluded"]]
    assert sum(1 for _ in log.iter_decisions(CAMPAIGN)) == N

    # A CSV of the same audience gives the same list (the CSV reader feeds the same path).
    csv = tmp_path / "audience.csv"
    frame.to_csv(csv, index=False)
    again = tmp_path / "ranked-again.parquet"
    score_file(bound, Audience(csv, chunk_rows=400), again, log, rank=True, capacity=120)
    assert pd.read_parquet(again)["decision_id"].tolist() == got["decision_id"].tolist()


def test_bad_row_is_named_and_nothing_is_logged_or_written(
    bound: BoundCampaign, log: DecisionLog, tmp_path: Path
) -> None:
    frame = audience(N).astype({"tenure_months": object})
    frame.loc[2222, "tenure_months"] = "twelve"
    data = tmp_path / "audience.csv"
    frame.to_csv(data, index=False)
    out = tmp_path / "decisions.parquet"
    with pytest.raises(DataError, match="tenure_months"):
        score_file(bound, Audience(data, chunk_rows=500), out, log)
    assert sum(1 for _ in log.iter_decisions(CAMPAIGN)) == 0
    assert list(tmp_path.glob("*decisions.parquet*")) == []

    frame = audience(300)
    frame.loc[120, "monthly_spend"] = float("inf")
    with pytest.raises(DataError, match=r"customer 120, feature 'monthly_spend'"):
        score_file(bound, Audience(_parquet(tmp_path, frame), chunk_rows=100), out, log)
    duplicated = pd.concat([audience(50), audience(50)])
    with pytest.raises(DataError, match="more than once"):
        score_file(bound, Audience(_parquet(tmp_path, duplicated)), out, log, rank=True)
    assert sum(1 for _ in log.iter_decisions(CAMPAIGN)) == 0
    assert not out.exists()


class FailingLog:
    """A decision log whose second append fails (a full disk, a lost database)."""

    def __init__(self, log: DecisionLog, out: Path) -> None:
        self.log, self.out, self.calls = log, out, 0

    def append_columns_sync(self, batches: list[DecisionColumns]) -> None:
        assert not self.out.exists(), "the output appeared before its decisions were logged"
        self.calls += 1
        if self.calls == 2:
            raise OSError("disk full")
        self.log.append_columns_sync(batches)


def test_a_failed_log_write_leaves_no_output(
    bound: BoundCampaign, log: DecisionLog, tmp_path: Path
) -> None:
    out = tmp_path / "decisions.csv"
    sink = FailingLog(log, out)
    with pytest.raises(OSError, match="disk full"):
        score_file(bound, Audience(_parquet(tmp_path, audience(N)), **SMALL), out, sink)
    assert list(tmp_path.glob("*decisions.csv*")) == []
    logged = sum(1 for _ in log.iter_decisions(CAMPAIGN))
    assert 0 < logged < N  # the first part is logged; a re-run logs each decision once

    score_file(bound, Audience(_parquet(tmp_path, audience(N)), **SMALL), out, log)
    assert sum(1 for _ in log.iter_decisions(CAMPAIGN)) == N
    assert len(pd.read_csv(out)) == N


def test_upshot_score_command(
    models_dir: Path, campaigns_file: Path, tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    parts = tmp_path / "parts"
    parts.mkdir()
    frame = audience(900)
    for k in range(3):
        frame.iloc[k * 300 : (k + 1) * 300].to_parquet(parts / f"part-{k}.parquet", index=False)
    out = tmp_path / "list.parquet"
    log = tmp_path / "cli.sqlite3"
    code = main([
        "score", str(parts), "--campaign", CAMPAIGN, "--out", str(out), "--rank",
        "--budget", "25", "--campaigns", str(campaigns_file), "--models-dir",
        str(models_dir), "--decision-log", str(log), "--quiet",
    ])  # fmt: skip
    assert code == 0
    printed = capsys.readouterr().out
    assert "decided 900 customers" in printed and "900 decisions logged" in printed
    listed = pq.read_table(out).to_pandas()
    on_list = listed[listed["rank"].notna()]
    assert on_list["cost"].sum() <= 25 + 1e-9
    assert listed["customer_id"].is_unique and len(listed) == 900

    code = main(["score", str(parts), "--campaign", CAMPAIGN, "--out", str(tmp_path / "x.txt"),
                 "--campaigns", str(campaigns_file), "--models-dir", str(models_dir)])  # fmt: skip
    assert code == 1
    assert "end it in .parquet or .csv" in capsys.readouterr().err
