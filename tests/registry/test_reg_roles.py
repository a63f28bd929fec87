"""Champion, challenger and rollback: atomic, recorded, and only for verified bundles."""

from __future__ import annotations

import json
import os
from pathlib import Path

import pytest

from service.errors import BundleError, NotFoundError, RegistryError
from service.registry import ModelRegistry
from service.registry import _files as files
from service.training import TrainingResult

Trained = tuple[Path, list[TrainingResult]]


def _promoted(root: Path) -> ModelRegistry:
    registry = ModelRegistry(root)
    registry.promote("tea", "v0001", actor="ana", reason="first model")
    registry.promote("tea", "v0002", actor="ben", reason="better Qini")
    return registry


def _temp_files(directory: Path) -> list[str]:
    return [p.name for p in directory.iterdir() if p.name.endswith(".tmp")]


def test_promote_and_rollback_change_the_champion_and_record_who_and_why(
    trained: Trained,
) -> None:
    registry = _promoted(trained[0])
    assert registry.champion("tea") == "v0002"
    assert registry.load("tea").version == "v0002"
    assert registry.rollback("tea", actor="cy", reason="complaints") == "v0001"
    assert registry.champion("tea") == "v0001"
    events = [e for e in registry.history("tea") if e["action"] != "created"]
    assert [(e["action"], e["version"], e["actor"], e["reason"]) for e in events] == [
        ("promoted", "v0001", "ana", "first model"),
        ("promoted", "v0002", "ben", "better Qini"),
        ("rolled_back", "v0001", "cy", "complaints"),
    ]
    assert events[-1]["previous_champion"] == "v0002"
    assert all(e["at"].endswith("Z") for e in events)
    with pytest.raises(RegistryError, match="no earlier champion"):
        registry.rollback("tea", actor="cy", reason="again")


def test_challenger_is_marked_separately(trained: Trained) -> None:
    registry = ModelRegistry(trained[0])
    registry.promote("tea", "v0001", actor="ana", reason="first")
    registry.promote("tea", "v0002", actor="ana", reason="try it", role="challenger")
    assert (registry.champion("tea"), registry.challenger("tea")) == ("v0001", "v0002")
    with pytest.raises(RegistryError, match="is the champion"):
        registry.promote("tea", "v0001", actor="ana", reason="x", role="challenger")
    registry.promote("tea", "v0002", actor="ana", reason="it won")
    assert (registry.champion("tea"), registry.challenger("tea")) == ("v0002", None)


def test_interrupted_promotion_leaves_the_old_champion(
    trained: Trained, monkeypatch: pytest.MonkeyPatch
) -> None:
    registry = ModelRegistry(trained[0])
    registry.promote("tea", "v0001", actor="ana", reason="first")
    history = registry.history("tea")

    def crash(src: str, dst: str) -> None:
        raise OSError("simulated crash during replace")

    monkeypatch.setattr(files.os, "replace", crash)
    with pytest.raises(OSError, match="simulated crash"):
        registry.promote("tea", "v0002", actor="ben", reason="better")
    monkeypatch.undo()
    assert registry.champion("tea") == "v0001"
    assert registry.history("tea") == history
    assert _temp_files(trained[0] / "tea") == []
    assert registry.load("tea").version == "v0001"


def test_interrupted_rollback_leaves_the_current_champion(
    trained: Trained, monkeypatch: pytest.MonkeyPatch
) -> None:
    registry = _promoted(trained[0])
    monkeypatch.setattr(files.os, "replace", lambda *a: (_ for _ in ()).throw(OSError("crash")))
    with pytest.raises(OSError, match="crash"):
        registry.rollback("tea", actor="cy", reason="oops")
    monkeypatch.undo()
    assert registry.champion("tea") == "v0002"
    assert registry.rollback("tea", actor="cy", reason="now it works") == "v0001"


def test_state_file_is_replaced_whole(trained: Trained, monkeypatch: pytest.MonkeyPatch) -> None:
    # The new state is fully written and flushed before os.replace swaps it in.
    registry = ModelRegistry(trained[0])
    seen: list[dict[str, object]] = []
    real_replace = os.replace

    def inspect(src: str, dst: str) -> None:
        seen.append(json.loads(Path(src).read_text()))
        real_replace(src, dst)

    monkeypatch.setattr(files.os, "replace", inspect)
    registry.promote("tea", "v0001", actor="ana", reason="first")
    assert seen == [{"champion": "v0001", "challenger": None, "previous": []}]


def test_promotion_refuses_an_unverified_bundle(trained: Trained) -> None:
    root, _ = trained
    registry = ModelRegistry(root)
    registry.promote("tea", "v0001", actor="ana", reason="first")
    (root / "tea" / "v0002" / "model.joblib").write_bytes(b"swapped")
    with pytest.raises(BundleError, match="does not match the SHA-256"):
        registry.promote("tea", "v0002", actor="ben", reason="better")
    assert registry.champion("tea") == "v0001"
    with pytest.raises(NotFoundError, match="no version"):
        registry.promote("tea", "v0003", actor="ben", reason="typo")


def test_rollback_refuses_an_unverified_previous_champion(trained: Trained) -> None:
    root, _ = trained
    registry = _promoted(root)
    (root / "tea" / "v0001" / "oof.npz").write_bytes(b"damaged")
    with pytest.raises(RegistryError, match="Cannot roll 'tea' back to v0001"):
        registry.rollback("tea", actor="cy", reason="oops")
    assert registry.champion("tea") == "v0002"


def test_promoting_the_champion_again_changes_nothing(trained: Trained) -> None:
    registry = ModelRegistry(trained[0])
    registry.promote("tea", "v0001", actor="ana", reason="first")
    before = registry.history("tea")
    registry.promote("tea", "v0001", actor="ana", reason="retry")
    assert registry.history("tea") == before


def test_a_torn_history_line_is_skipped_and_not_glued_to_the_next(trained: Trained) -> None:
    root, _ = trained
    registry = ModelRegistry(root)
    with (root / "tea" / "history.jsonl").open("a") as handle:
        handle.write('{"action": "promo')  # a crash cut this append short
    registry.promote("tea", "v0001", actor="ana", reason="first")
    actions = [e["action"] for e in registry.history("tea")]
    assert actions == ["created", "created", "promoted"]


def test_damaged_state_file_is_reported(trained: Trained) -> None:
    root, _ = trained
    (root / "tea" / "state.json").write_text("{")
    with pytest.raises(RegistryError, match="state.json is not valid JSON"):
        ModelRegistry(root).champion("tea")


def test_names_and_versions_are_listed_in_order(trained: Trained) -> None:
    registry = ModelRegistry(trained[0])
    assert registry.names() == ["tea"]
    assert registry.versions("tea") == ["v0001", "v0002"]
    (trained[0] / "tea" / ".staging-leftover").mkdir()
    assert registry.versions("tea") == ["v0001", "v0002"]
