"""`upshot outcomes correct|history` on both engines: explicit, audited, checked."""

from __future__ import annotations

import json
from collections.abc import Callable
from pathlib import Path

import pytest

from service.cli import main
from service.decisions import DecisionLog, DecisionRecord, Outcome


def test_correct_then_history(
    location: str,
    tmp_path: Path,
    make_record: Callable[..., DecisionRecord],
    capsys: pytest.CaptureFixture[str],
) -> None:
    record = make_record(1)
    with DecisionLog.open(location) as log:
        log.append_sync([record])
        log.record_outcomes([Outcome(record.decision_id, 1.0)])
    d_id, where = record.decision_id, ["--log", location]
    models = ["--models-dir", str(tmp_path / "models")]  # no manifest: only the amount bound
    assert main(["outcomes", "correct", d_id, "0", "--reason", "wrong account",
                 "--actor", "ana", *where, *models]) == 0  # fmt: skip
    assert f"outcome of decision {d_id} corrected from 1 to 0 by ana" in capsys.readouterr().out
    assert main(["outcomes", "correct", d_id, "1e300", "--reason", "typo", *where, *models]) == 1
    assert "is beyond +/-1e+09" in capsys.readouterr().err
    assert main(["outcomes", "history", d_id, *where]) == 0
    shown = json.loads(capsys.readouterr().out)
    assert shown["outcome"]["outcome"] == 0.0
    assert [(c["actor"], c["reason"], c["previous"]["outcome"]) for c in shown["corrections"]] == [
        ("ana", "wrong account", 1.0)
    ]
