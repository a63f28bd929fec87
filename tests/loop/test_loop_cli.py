"""The learning-loop commands: outcomes import, lift, replay, export, drift."""

from __future__ import annotations

import json
import shutil
from pathlib import Path

import pandas as pd
import pytest
from loop_world import CAMPAIGN, bind, run_day_in_process, train_worse_model

from service.cli import main as run_cli
from service.decisions import DecisionLog
from service.registry import ModelRegistry


def _common(world) -> list[str]:
    return ["--log", str(world.log_path), "--campaigns", str(world.campaigns_file)]


@pytest.fixture
def fresh_log(world, tmp_path) -> tuple[Path, pd.DataFrame]:
    """A log with one scored day and no outcomes yet, and that day's outcome file."""
    path = tmp_path / "fresh.sqlite3"
    with DecisionLog.open(path) as log:
        day = run_day_in_process(bind(world.models_dir, world.campaigns_file), log, None, 5, 400)
    frame = pd.DataFrame({"decision_id": day.decision_ids, "outcome": day.outcome.astype(int)})
    frame["observed_at"] = "2026-03-09T08:00:00+00:00"
    return path, frame


def test_outcomes_import_is_idempotent_and_all_or_nothing(fresh_log, tmp_path, capsys) -> None:
    path, frame = fresh_log
    file = tmp_path / "outcomes.csv"
    pd.concat([frame, pd.DataFrame({"decision_id": ["0123"], "outcome": [1]})]).to_csv(
        file, index=False
    )
    assert run_cli(["outcomes", "import", str(file), "--log", str(path)]) == 0
    out = capsys.readouterr().out
    assert "400 outcome(s) recorded, 0 already" in out and "1 with an unknown" in out
    assert "0123" in out  # the id is kept as text, leading zero included
    assert run_cli(["outcomes", "import", str(file), "--log", str(path)]) == 0
    assert "0 outcome(s) recorded, 400 already" in capsys.readouterr().out
    frame.loc[3, "outcome"] = 1 - frame.loc[3, "outcome"]
    frame.to_parquet(tmp_path / "changed.parquet")
    changed = ["outcomes", "import", str(tmp_path / "changed.parquet"), "--log", str(path)]
    assert run_cli(changed) == 1
    assert "differ from the ones already recorded" in capsys.readouterr().err
    with DecisionLog.open(path) as log:
        assert log.counts().outcomes == 400


def test_lift_prints_intervals_and_draws_a_plot(world, tmp_path, capsys) -> None:
    png = tmp_path / "lift.png"
    assert run_cli(["lift", CAMPAIGN, "--plot", str(png), *_common(world)]) == 0
    out = capsys.readouterr().out
    assert "lift per contact" in out and "incremental profit" in out and png.is_file()
    assert run_cli(["lift", CAMPAIGN, "--json", *_common(world)]) == 0
    body = json.loads(capsys.readouterr().out)
    assert body["decisions"] == 6000 and body["targeted"]["held_out"] > 0


def test_replay_prints_three_estimates(world, capsys) -> None:
    argv = ["replay", "--campaign", CAMPAIGN, "--model", f"larkspur:{world.first_version}"]
    assert run_cli([*argv, *_common(world), "--models-dir", str(world.models_dir)]) == 0
    out = capsys.readouterr().out
    for method in ("IPS", "SNIPS", "DR", "effective sample size"):
        assert method in out


def test_export_prints_the_training_command(world, tmp_path, capsys) -> None:
    out_file = tmp_path / "log.csv"
    argv = ["export", "--campaign", CAMPAIGN, "--out", str(out_file), "--log", str(world.log_path)]
    assert run_cli(argv) == 0
    out = capsys.readouterr().out
    assert "wrote 6000 decisions" in out and "--weight ipw" in out
    assert Path(str(out_file) + ".source.json").is_file()
    # The printed command trains the next version as it stands (plus test-size options).
    command = next(line.split() for line in out.splitlines() if "upshot train" in line)
    argv = [("from-log" if a == "MODEL" else a) for a in command[1:]]
    quick = ["--learner", "t", "--base", "linear", "--bootstrap", "3", "--folds", "3", "--quiet"]
    assert run_cli([*argv, *quick, "--models-dir", str(tmp_path / "models")]) == 0
    out = capsys.readouterr().out
    assert "trained from-log v0001" in out and "6000 logged decisions" in out
    # The new version's manifest points to the decisions it came from.
    manifest = ModelRegistry(tmp_path / "models").verify("from-log", "v0001")
    source = manifest["source_decisions"]
    assert source["campaign"] == CAMPAIGN and source["decisions"] == 6000
    assert (
        source["sha256"] == json.loads(Path(str(out_file) + ".source.json").read_text())["sha256"]
    )


def test_promotion_can_require_a_replay_win(world, tmp_path, capsys) -> None:
    models = tmp_path / "models"
    shutil.copytree(world.models_dir, models)
    worse = train_worse_model(models)
    registry = ModelRegistry(models)
    base = [*_common(world), "--models-dir", str(models), "--reason", "test"]
    gate = ["--require-replay", "--campaign", CAMPAIGN]
    assert run_cli(["models", "promote", "larkspur", worse, *base, *gate]) == 1
    assert "Not promoted" in capsys.readouterr().err
    assert registry.champion("larkspur") == world.first_version
    # Without the check it goes through; then the first model wins its way back.
    assert run_cli(["models", "promote", "larkspur", worse, *base]) == 0
    assert run_cli(["models", "promote", "larkspur", world.first_version, *base, *gate]) == 0
    out = capsys.readouterr().out
    assert "replay check:" in out and "beats the champion" in out
    assert registry.champion("larkspur") == world.first_version
    # A margin larger than any gain refuses even the better model.
    assert run_cli(["models", "promote", "larkspur", worse, *base]) == 0
    margin = [*gate, "--margin", "1000"]
    assert run_cli(["models", "promote", "larkspur", world.first_version, *base, *margin]) == 1


def test_drift_prints_a_psi_table(world, capsys) -> None:
    argv = ["drift", "--campaign", CAMPAIGN, "--last", "1000", *_common(world)]
    assert run_cli([*argv, "--models-dir", str(world.models_dir)]) == 0
    out = capsys.readouterr().out
    assert "tenure_months" in out and "common practice, no source" in out
