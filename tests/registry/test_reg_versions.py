"""Writing versions: concurrent writers get distinct ids; a failed write leaves nothing."""

from __future__ import annotations

import threading
import time
from pathlib import Path
from typing import Any

import pytest

from service.registry import ModelRegistry


def _build(delay: float) -> Any:
    def build(staging: Path, version: str) -> dict[str, Any]:
        (staging / "model.joblib").write_bytes(f"model {version}".encode())
        time.sleep(delay)  # widen the window in which a second writer could interfere
        return {"note": "not a real model; only the file handling is under test"}

    return build


def test_concurrent_writers_get_distinct_versions(tmp_path: Path) -> None:
    registry = ModelRegistry(tmp_path)
    made: list[str] = []

    def write() -> None:
        made.append(registry.add_version("tea", _build(0.2), {"model.joblib": "model"})[0])

    threads = [threading.Thread(target=write) for _ in range(3)]
    for thread in threads:
        thread.start()
    for thread in threads:
        thread.join()
    assert sorted(made) == ["v0001", "v0002", "v0003"]
    assert [e["version"] for e in registry.history("tea")] == ["v0001", "v0002", "v0003"]


def test_failed_rename_leaves_no_staging_directory(
    tmp_path: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    registry = ModelRegistry(tmp_path)
    registry.add_version("tea", _build(0), {"model.joblib": "model"})
    from service.registry import registry as module

    def crash(src: object, dst: object) -> None:
        raise OSError("simulated crash before the rename")

    monkeypatch.setattr(module.os, "rename", crash)
    with pytest.raises(OSError, match="simulated crash"):
        registry.add_version("tea", _build(0), {"model.joblib": "model"})
    monkeypatch.undo()
    assert sorted(p.name for p in (tmp_path / "tea").iterdir()) == [
        ".lock",
        "history.jsonl",
        "v0001",
    ]


def test_invalid_new_name_is_refused_before_anything_is_written(tmp_path: Path) -> None:
    from service.errors import DataError

    with pytest.raises(DataError, match="not valid"):
        ModelRegistry(tmp_path).add_version("../x", _build(0), {"model.joblib": "model"})
    assert list(tmp_path.iterdir()) == []
