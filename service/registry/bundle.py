"""One model version on disk: verify it, then (and only then) load it.

Layout of ``models/NAME/VERSION/``::

    manifest.json      what the model is, how well it ranks, SHA-256 of each artifact
    model.joblib       the fitted BootstrapUplift (pickle: runs code when loaded)
    oof.npz            out-of-fold predictions behind the metrics (no pickle)
    report/            index.html, PNG plots and CSV tables (derived; rebuilt on demand)

A joblib file executes code when it is loaded, so :func:`load_bundle` checks the format
version, the manifest's own digest and the hash of every artifact before unpickling.
The report is not hashed: it is never loaded by code, and ``upshot report`` rebuilds it
from the verified artifacts.
"""

from __future__ import annotations

import json
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import joblib
import numpy as np

from service.errors import BundleError, NotFoundError
from service.registry._files import sha256_file
from service.registry.manifest import MANIFEST_FILE, check_libraries, check_manifest

__all__ = [
    "MODEL_FILE",
    "OOF_FILE",
    "REPORT_DIR",
    "LoadedBundle",
    "OutOfFold",
    "artifact_entry",
    "load_bundle",
    "read_out_of_fold",
    "verify_bundle",
    "write_out_of_fold",
]

MODEL_FILE = "model.joblib"
OOF_FILE = "oof.npz"
REPORT_DIR = "report"


@dataclass(frozen=True)
class LoadedBundle:
    """A verified model version: its manifest and the fitted model (None when it was
    loaded without unpickling, e.g. to serve its compact form)."""

    name: str
    version: str
    path: Path
    manifest: dict[str, Any]
    model: Any


@dataclass(frozen=True, eq=False)
class OutOfFold:
    """Cross-validated predictions: each row scored by a model that never saw it.

    ``scores`` has shape (n, n_arms) in the order of ``arms``; ``treatment`` holds the
    arm labels; ``fold`` the fold of each row; ``weight`` the sample weights or None.
    """

    scores: np.ndarray
    y: np.ndarray
    treatment: np.ndarray
    fold: np.ndarray
    weight: np.ndarray | None
    arms: list[Any]
    control: Any


def artifact_entry(path: Path, role: str) -> dict[str, Any]:
    """The manifest record of one artifact file."""
    return {"sha256": sha256_file(path), "bytes": path.stat().st_size, "role": role}


def _read_manifest(path: Path) -> dict[str, Any]:
    where = str(path / MANIFEST_FILE)
    if not path.is_dir():
        raise NotFoundError(f"No model bundle at {path}; list versions with `upshot models list`.")
    try:
        text = (path / MANIFEST_FILE).read_text(encoding="utf-8")
    except FileNotFoundError:
        raise BundleError(
            f"{where} is missing, so {path} is not a complete bundle; delete the directory "
            "or retrain the model."
        ) from None
    try:
        manifest = json.loads(text)
    except json.JSONDecodeError as err:
        raise BundleError(
            f"{where} is not valid JSON ({err.msg} at line {err.lineno}); restore it from "
            "backup or retrain the model."
        ) from err
    return check_manifest(manifest, where)


def _check_artifact(path: Path, file: str, entry: Any) -> None:
    if not isinstance(entry, dict) or "sha256" not in entry:
        raise BundleError(
            f"The manifest of {path} has no SHA-256 for {file!r}; the bundle cannot be "
            "verified, retrain the model."
        )
    if "/" in file or "\\" in file or file.startswith(".") or file == MANIFEST_FILE:
        raise BundleError(
            f"The manifest of {path} lists the artifact {file!r}, which is not a plain file "
            "name inside the bundle; the manifest is not trustworthy, retrain the model."
        )
    target = path / file
    if not target.is_file():
        raise BundleError(
            f"Artifact {target} is missing; restore the bundle from backup or retrain."
        )
    if sha256_file(target) != entry["sha256"]:
        raise BundleError(
            f"Artifact {target} does not match the SHA-256 recorded in its manifest, so it "
            "was changed or damaged after training and will not be loaded; restore the "
            "original file from backup or retrain the model."
        )


def verify_bundle(path: Path) -> dict[str, Any]:
    """Verify the bundle at ``path`` without unpickling anything; return its manifest.

    Raises
    ------
    NotFoundError
        If ``path`` is not a directory.
    BundleError
        Missing or unreadable manifest, unsupported format version, a manifest edited
        after writing, a name/version that does not match the directory, or an artifact
        that is missing or whose SHA-256 differs from the manifest.
    """
    manifest = _read_manifest(path)
    if (manifest["name"], manifest["version"]) != (path.parent.name, path.name):
        raise BundleError(
            f"The manifest at {path} describes {manifest['name']}:{manifest['version']}, not "
            f"{path.parent.name}:{path.name}; a bundle must stay in the directory it was "
            "written to, so move it back or retrain."
        )
    artifacts = manifest["artifacts"]
    if not isinstance(artifacts, dict) or MODEL_FILE not in artifacts:
        raise BundleError(
            f"The manifest of {path} lists no {MODEL_FILE}; the bundle is incomplete, "
            "retrain the model."
        )
    for file, entry in artifacts.items():
        _check_artifact(path, file, entry)
    return manifest


def load_bundle(path: Path, *, unpickle: bool = True) -> LoadedBundle:
    """Verify the bundle at ``path`` and only then unpickle its model (``unpickle=False``
    verifies only: the model is None)."""
    manifest = verify_bundle(path)
    if not unpickle:
        return LoadedBundle(manifest["name"], manifest["version"], path, manifest, None)
    check_libraries(manifest, str(path / MANIFEST_FILE))
    model = joblib.load(path / MODEL_FILE)
    if [str(a) for a in getattr(model, "arms_", [])] != [str(a) for a in manifest["arms"]]:
        raise BundleError(
            f"The model in {path} predicts arms {getattr(model, 'arms_', None)} but the "
            f"manifest lists {manifest['arms']}; the bundle is inconsistent, retrain it."
        )
    return LoadedBundle(manifest["name"], manifest["version"], path, manifest, model)


def write_out_of_fold(path: Path, oof: OutOfFold) -> None:
    """Save out-of-fold predictions as a plain (pickle-free) ``.npz``.

    Treatment is stored as codes: 0 for control, ``j`` for ``arms[j - 1]``.
    """
    labels = [oof.control, *oof.arms]
    lookup = {str(label): code for code, label in enumerate(labels)}
    codes = np.array([lookup[str(t)] for t in oof.treatment], dtype=np.int64)
    arrays: dict[str, np.ndarray] = {
        "scores": np.asarray(oof.scores, dtype=np.float64),
        "y": np.asarray(oof.y, dtype=np.float64),
        "treatment_code": codes,
        "fold": np.asarray(oof.fold, dtype=np.int64),
    }
    if oof.weight is not None:
        arrays["weight"] = np.asarray(oof.weight, dtype=np.float64)
    with path.open("wb") as handle:
        np.savez_compressed(handle, **arrays)  # type: ignore[arg-type]


def read_out_of_fold(path: Path, manifest: dict[str, Any]) -> OutOfFold:
    """Read ``oof.npz`` of a verified bundle; labels come from the manifest."""
    with np.load(path / OOF_FILE, allow_pickle=False) as data:
        arrays = {key: data[key] for key in data.files}
    labels = np.array([manifest["control"], *manifest["arms"]], dtype=object)
    return OutOfFold(
        scores=arrays["scores"],
        y=arrays["y"],
        treatment=labels[arrays["treatment_code"]],
        fold=arrays["fold"],
        weight=arrays.get("weight"),
        arms=list(manifest["arms"]),
        control=manifest["control"],
    )
