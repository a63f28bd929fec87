"""What stopped a new user: one-line errors for a broken campaign file, the closest model
name for a typo, and a lift that refuses when there is no random control."""

from __future__ import annotations

from pathlib import Path

import pytest

from service.cli import main
from service.errors import NotFoundError
from service.registry import ModelRegistry


def test_serve_with_a_broken_campaign_file_prints_one_line(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    bad = tmp_path / "campaigns.toml"
    bad.write_text('[campaigns.c]\nmodel = "m"\nsalt = "s"\nexploraton = 0.1\n', encoding="utf-8")
    argv = ["serve", "--campaigns", str(bad), "--models-dir", str(tmp_path / "models"),
            "--decision-log", str(tmp_path / "log.sqlite3"), "--port", "1"]  # fmt: skip
    assert main(argv) == 1
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and err[0].startswith("upshot: error: Campaign 'c': unknown key")
    assert "exploraton" in err[0]


def test_unknown_model_suggests_the_closest_known_name(tmp_path: Path) -> None:
    registry = ModelRegistry(tmp_path)
    (tmp_path / "larkspur" / "v0001").mkdir(parents=True)
    assert registry.names() == ["larkspur"]
    with pytest.raises(NotFoundError, match="did you mean 'larkspur'"):
        registry.resolve("larkspru")


def test_unknown_model_in_an_empty_registry_says_how_to_train(tmp_path: Path) -> None:
    with pytest.raises(NotFoundError, match=r"no models yet; train one .*--name larkspur"):
        ModelRegistry(tmp_path).resolve("larkspur")
