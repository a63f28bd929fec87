"""Bundles load back exactly, and anything tampered with is refused before unpickling."""

from __future__ import annotations

import hashlib
import json
from pathlib import Path

import joblib
import numpy as np
import pandas as pd
import pytest

from service.errors import BundleError, NotFoundError
from service.registry import FORMAT_VERSION, ModelRegistry, load_bundle, verify_bundle
from service.registry.manifest import seal
from service.training import TrainingResult

Trained = tuple[Path, list[TrainingResult]]


def _sha(path: Path) -> str:
    return hashlib.sha256(path.read_bytes()).hexdigest()


def _no_unpickling(monkeypatch: pytest.MonkeyPatch) -> None:
    def refuse(*args: object, **kwargs: object) -> None:
        raise AssertionError("joblib.load was called on an unverified bundle")

    monkeypatch.setattr(joblib, "load", refuse)


def _rewrite_manifest(path: Path, change: dict[str, object], *, reseal: bool) -> None:
    manifest = json.loads((path / "manifest.json").read_text())
    manifest.update(change)
    if reseal:
        manifest = seal(manifest)
    (path / "manifest.json").write_text(json.dumps(manifest))


def test_loaded_model_predicts_exactly_like_the_trained_one(
    trained: Trained, campaign: pd.DataFrame
) -> None:
    root, results = trained
    loaded = ModelRegistry(root).load("tea", "v0002")
    before = results[1].model.predict_interval(campaign, confidence=0.9)
    after = loaded.model.predict_interval(campaign, confidence=0.9)
    for a, b in zip(before, after, strict=True):
        np.testing.assert_array_equal(a, b)
    assert (loaded.name, loaded.version) == ("tea", "v0002")
    assert loaded.manifest == results[1].manifest


def test_tampered_artifact_is_refused_before_unpickling(
    trained: Trained, monkeypatch: pytest.MonkeyPatch
) -> None:
    root, _ = trained
    model = root / "tea" / "v0001" / "model.joblib"
    data = bytearray(model.read_bytes())
    data[len(data) // 2] ^= 0xFF
    model.write_bytes(bytes(data))
    _no_unpickling(monkeypatch)
    with pytest.raises(BundleError, match=r"model\.joblib does not match the SHA-256"):
        ModelRegistry(root).load("tea", "v0001")


def test_missing_artifact_is_refused(trained: Trained) -> None:
    root, _ = trained
    (root / "tea" / "v0001" / "oof.npz").unlink()
    with pytest.raises(BundleError, match=r"oof\.npz is missing"):
        ModelRegistry(root).verify("tea", "v0001")


def test_edited_manifest_is_refused(trained: Trained, monkeypatch: pytest.MonkeyPatch) -> None:
    root, _ = trained
    path = root / "tea" / "v0001"
    _rewrite_manifest(path, {"arms": ["email"]}, reseal=False)
    _no_unpickling(monkeypatch)
    with pytest.raises(BundleError, match="modified after it was written"):
        ModelRegistry(root).load("tea", "v0001")


def test_resealed_manifest_is_refused_by_the_registry_history(
    trained: Trained, monkeypatch: pytest.MonkeyPatch
) -> None:
    # A manifest whose digest was recomputed after an edit passes the bundle's own check
    # but not the digest the registry recorded when the version was created.
    root, _ = trained
    path = root / "tea" / "v0001"
    manifest = json.loads((path / "manifest.json").read_text())
    manifest["artifacts"]["model.joblib"]["sha256"] = "0" * 64
    (path / "model.joblib").write_bytes(b"not the trained model")
    (path / "manifest.json").write_text(json.dumps(seal(manifest)))
    _no_unpickling(monkeypatch)
    with pytest.raises(BundleError):
        ModelRegistry(root).load("tea", "v0001")
    manifest["artifacts"]["model.joblib"]["sha256"] = _sha(path / "model.joblib")
    (path / "manifest.json").write_text(json.dumps(seal(manifest)))
    verify_bundle(path)  # consistent on its own ...
    with pytest.raises(BundleError, match="differs from the manifest recorded"):
        ModelRegistry(root).load("tea", "v0001")  # ... but not what was recorded


def test_artifact_outside_the_bundle_is_refused(trained: Trained) -> None:
    root, _ = trained
    path = root / "tea" / "v0001"
    manifest = json.loads((path / "manifest.json").read_text())
    manifest["artifacts"]["../state.json"] = {"sha256": "0" * 64}
    (path / "manifest.json").write_text(json.dumps(seal(manifest)))
    with pytest.raises(BundleError, match="not a plain file name"):
        verify_bundle(path)


@pytest.mark.parametrize(("found", "hint"), [(FORMAT_VERSION + 1, "upgrade"), (0, "retrain")])
def test_other_format_version_is_refused(trained: Trained, found: int, hint: str) -> None:
    root, _ = trained
    path = root / "tea" / "v0001"
    _rewrite_manifest(path, {"format_version": found}, reseal=True)
    with pytest.raises(BundleError, match=f"format_version {found}.*{hint}"):
        verify_bundle(path)


def test_other_scikit_learn_version_is_refused(
    trained: Trained, monkeypatch: pytest.MonkeyPatch
) -> None:
    root, _ = trained
    path = root / "tea" / "v0001"
    manifest = json.loads((path / "manifest.json").read_text())
    manifest["libraries"]["scikit-learn"] = "0.1.0"
    (path / "manifest.json").write_text(json.dumps(seal(manifest)))
    _no_unpickling(monkeypatch)
    with pytest.raises(BundleError, match=r"scikit-learn '0\.1\.0'.*retrain"):
        load_bundle(path)


def test_damaged_or_missing_manifest_is_refused(trained: Trained) -> None:
    root, _ = trained
    path = root / "tea" / "v0001"
    (path / "manifest.json").write_text("{not json")
    with pytest.raises(BundleError, match="not valid JSON"):
        verify_bundle(path)
    (path / "manifest.json").unlink()
    with pytest.raises(BundleError, match="manifest.json is missing"):
        verify_bundle(path)


def test_moved_bundle_is_refused(trained: Trained) -> None:
    root, _ = trained
    (root / "tea" / "v0001").rename(root / "tea" / "v0009")
    with pytest.raises(BundleError, match="describes tea:v0001, not tea:v0009"):
        verify_bundle(root / "tea" / "v0009")


def test_unknown_names_and_versions(trained: Trained) -> None:
    registry = ModelRegistry(trained[0])
    with pytest.raises(NotFoundError, match="no version 'v0042'.*v0001"):
        registry.load("tea", "v0042")
    with pytest.raises(NotFoundError, match="no champion"):
        registry.load("tea")
    with pytest.raises(NotFoundError, match="not valid"):
        registry.load("../tea")
    assert registry.versions("coffee") == []
    assert registry.champion("coffee") is None
