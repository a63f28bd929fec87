"""The documented workflow, end to end through `upshot` on demo data."""

from __future__ import annotations

from pathlib import Path

import pytest

from service.cli import main

FAST = ["--learner", "t", "--base", "linear", "--bootstrap", "2", "--folds", "3", "--quiet"]


def _run(capsys: pytest.CaptureFixture[str], *argv: str | Path) -> tuple[int, str, str]:
    code = main([str(a) for a in argv])
    out, err = capsys.readouterr()
    return code, out, err


@pytest.mark.slow
def test_train_inspect_promote_rollback_and_report(
    tmp_path: Path, demo_csv: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    models = tmp_path / "models"
    train = [
        "train",
        demo_csv,
        "--treatment",
        "treatment",
        "--outcome",
        "renewed",
        "--name",
        "tea",
        "--models-dir",
        models,
        "--cost",
        "email=0.1,call=1.5",
        *FAST,
    ]
    code, out, err = _run(capsys, *train)
    assert code == 0, err
    lines = out.strip().splitlines()
    assert "trained tea v0001" in out
    assert any(line.startswith("  call vs none: Qini") for line in lines)
    assert lines[-1] == f"report: {models / 'tea' / 'v0001' / 'report' / 'index.html'}"
    assert (models / "tea" / "v0001" / "report" / "qini.png").is_file()

    code, out, _ = _run(capsys, "models", "list", "--models-dir", models)
    assert code == 0 and "tea" in out and "v0001" in out and "ok" in out

    assert _run(capsys, *train)[0] == 0
    for version in ("v0001", "v0002"):
        code, out, _ = _run(
            capsys,
            "models",
            "promote",
            "tea",
            version,
            "--reason",
            "test",
            "--actor",
            "ana",
            "--models-dir",
            models,
        )
        assert code == 0 and f"tea {version} is now the champion" in out
    code, out, _ = _run(capsys, "models", "show", "tea", "--models-dir", models)
    assert out.startswith("tea v0002 (champion)")
    code, out, _ = _run(
        capsys, "models", "rollback", "tea", "--reason", "bad week", "--models-dir", models
    )
    assert code == 0 and "v0001 is the champion again (was v0002)" in out
    code, out, _ = _run(capsys, "models", "history", "tea", "--models-dir", models)
    assert "rolled_back v0001" in out and "bad week" in out

    code, out, _ = _run(capsys, "report", "tea:v0002", "--cost", "0.2", "--models-dir", models)
    assert code == 0 and out.strip().endswith("v0002/report/index.html")
    assert "contact cost 0.2" in (models / "tea" / "v0002" / "report" / "index.html").read_text()

    code, out, _ = _run(capsys, "models", "verify", "--models-dir", models)
    assert code == 0 and "2 of 2 bundle(s) verified" in out
    (models / "tea" / "v0002" / "model.joblib").write_bytes(b"tampered")
    code, out, _ = _run(capsys, "models", "verify", "--models-dir", models)
    assert code == 1 and "FAILED tea v0002" in out
    code, _, err = _run(
        capsys, "models", "promote", "tea", "v0002", "--reason", "x", "--models-dir", models
    )
    assert code == 1 and err.startswith("upshot: error: Artifact")


def test_parquet_input_and_promote_at_training(
    tmp_path: Path, demo_csv: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    import pandas as pd

    parquet = tmp_path / "campaign.parquet"
    pd.read_csv(demo_csv).to_parquet(parquet)
    code, out, err = _run(
        capsys,
        "train",
        parquet,
        "--treatment",
        "treatment",
        "--outcome",
        "renewed",
        "--models-dir",
        tmp_path / "m",
        "--promote",
        *FAST,
    )
    assert code == 0, err
    assert "campaign v0001 is now the champion" in out


def test_usage_errors_exit_with_2(capsys: pytest.CaptureFixture[str]) -> None:
    assert main([]) == 2
    with pytest.raises(SystemExit) as exit_info:
        main(["models", "promote", "tea", "v0001"])  # no --reason
    assert exit_info.value.code == 2
    assert "--reason" in capsys.readouterr().err
