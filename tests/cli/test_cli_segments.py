"""`upshot segments` and the report's segments section, on demo data."""

from __future__ import annotations

import json
from pathlib import Path

import pandas as pd
import pytest

from service.cli import main

FAST = ["--learner", "r", "--base", "linear", "--bootstrap", "2", "--folds", "3", "--quiet"]
FIELDS = {
    "rule", "share", "n", "arm", "uplift", "low", "high", "control_rate", "predicted_uplift",
    "reading",
}  # fmt: skip


def _run(capsys: pytest.CaptureFixture[str], *argv: str | Path) -> tuple[int, str, str]:
    code = main([str(a) for a in argv])
    out, err = capsys.readouterr()
    return code, out, err


@pytest.fixture
def trained(tmp_path: Path, demo_csv: Path, capsys: pytest.CaptureFixture[str]) -> Path:
    models = tmp_path / "models"
    code, _, err = _run(
        capsys, "train", demo_csv, "--treatment", "treatment", "--outcome", "renewed",
        "--name", "tea", "--models-dir", models, *FAST,
    )  # fmt: skip
    assert code == 0, err
    return models


def test_segments_are_stored_printed_and_in_the_report(
    trained: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    code, out, err = _run(capsys, "segments", "tea", "--json", "--models-dir", trained)
    assert code == 0, err
    body = json.loads(out)
    assert body["version"] == "v0001" and body["depth"] == 3
    assert {s["arm"] for s in body["segments"]} == {"email", "call"}
    for segment in body["segments"]:
        assert set(segment) == FIELDS
        assert segment["reading"] in {
            "persuadables", "do-not-disturb", "sure things", "lost causes", "too few rows",
        }  # fmt: skip
    for arm in ("email", "call"):
        shares = [s["share"] for s in body["segments"] if s["arm"] == arm]
        assert sum(shares) == pytest.approx(1.0)
    assert "tenure_months" in body["features"] and "customer_id" not in body["features"]
    assert set(body["importance"]["features"]) == set(body["features"])

    code, out, _ = _run(capsys, "segments", "tea:v0001", "--models-dir", trained)
    assert code == 0 and "caution:" in out and "features used:" in out
    page = (trained / "tea" / "v0001" / "report" / "index.html").read_text()
    assert "honest segments" in page and "What drives the predicted uplift" in page


def test_other_settings_need_the_training_table(
    trained: Path, demo_csv: Path, tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    code, _, err = _run(capsys, "segments", "tea", "--depth", "2", "--models-dir", trained)
    assert code == 1 and "pass --data FILE" in err

    code, out, err = _run(
        capsys, "segments", "tea", "--depth", "1", "--data", demo_csv, "--json",
        "--models-dir", trained,
    )  # fmt: skip
    assert code == 0, err
    body = json.loads(out)
    assert body["depth"] == 1 and len(body["segments"]) <= 4  # two arms, two leaves each

    changed = pd.read_csv(demo_csv)
    changed.loc[0, "renewed"] = 1 - changed.loc[0, "renewed"]
    other = tmp_path / "other.csv"
    changed.to_csv(other, index=False)
    code, _, err = _run(
        capsys, "segments", "tea", "--depth", "1", "--data", other, "--models-dir", trained
    )
    assert code == 1 and "is not the table tea:v0001 was trained on" in err
