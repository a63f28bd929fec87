"""The bundle manifest: format version, self-digest and library versions.

``manifest.json`` describes one model version and lists the SHA-256 of every artifact.
It also carries ``manifest_sha256``, the SHA-256 of its own canonical JSON form without
that key, so an edited manifest is detected. This is an integrity check (accidents,
careless edits, partial copies), not a signature: someone who can write the directory
can also recompute the hashes, so protect ``models/`` with file permissions.
"""

from __future__ import annotations

import hashlib
import json
import platform
from importlib import metadata
from typing import Any

from service.errors import BundleError

__all__ = [
    "FORMAT_VERSION",
    "MANIFEST_FILE",
    "LIBRARIES",
    "canonical_digest",
    "check_libraries",
    "check_manifest",
    "library_versions",
    "seal",
]

FORMAT_VERSION = 1
MANIFEST_FILE = "manifest.json"
# Libraries whose objects live inside the pickled model (or that wrote it).
LIBRARIES = ("upshot", "scikit-learn", "numpy", "scipy", "pandas", "joblib")
# A pickled scikit-learn model is only supported by the exact version that wrote it.
STRICT_LIBRARIES = ("scikit-learn",)

_DIGEST_KEY = "manifest_sha256"
_REQUIRED = (
    "format_version",
    "name",
    "version",
    "features",
    "outcome_type",
    "control",
    "arms",
    "learner",
    "metrics",
    "reference",
    "artifacts",
    "serving",
    "libraries",
    "created_at",
)


def library_versions() -> dict[str, str]:
    """Installed versions of the libraries a bundle depends on, plus Python's."""
    versions = {"python": platform.python_version()}
    for name in LIBRARIES:
        try:
            versions[name] = metadata.version(name)
        except metadata.PackageNotFoundError:
            versions[name] = "not installed"
    return versions


def canonical_digest(manifest: dict[str, Any]) -> str:
    """SHA-256 of the manifest's canonical JSON (sorted keys, no spaces), digest key excluded."""
    body = {k: v for k, v in manifest.items() if k != _DIGEST_KEY}
    text = json.dumps(body, sort_keys=True, separators=(",", ":"), ensure_ascii=True)
    return hashlib.sha256(text.encode("utf-8")).hexdigest()


def seal(manifest: dict[str, Any]) -> dict[str, Any]:
    """Return a copy of ``manifest`` carrying its own digest."""
    sealed = {k: v for k, v in manifest.items() if k != _DIGEST_KEY}
    sealed[_DIGEST_KEY] = canonical_digest(sealed)
    return sealed


def check_manifest(manifest: Any, where: str) -> dict[str, Any]:
    """Check format version, required keys and self-digest; return the manifest.

    ``where`` names the file in error messages.
    """
    if not isinstance(manifest, dict):
        raise BundleError(f"{where} is not a JSON object; the bundle is damaged, retrain it.")
    found = manifest.get("format_version")
    if found != FORMAT_VERSION:
        hint = (
            "it was written by a newer upshot; upgrade upshot to load it"
            if isinstance(found, int) and found > FORMAT_VERSION
            else "retrain the model with this upshot to write a current bundle"
        )
        raise BundleError(
            f"{where} has format_version {found!r} but this upshot reads format "
            f"{FORMAT_VERSION}; {hint}."
        )
    missing = [key for key in _REQUIRED if key not in manifest]
    if missing:
        raise BundleError(
            f"{where} lacks the key(s) {missing}; the bundle is incomplete, retrain it."
        )
    if manifest.get(_DIGEST_KEY) != canonical_digest(manifest):
        raise BundleError(
            f"{where} was modified after it was written (its manifest_sha256 does not match "
            "its content); restore the original file from backup or retrain the model."
        )
    return manifest


def check_libraries(manifest: dict[str, Any], where: str) -> None:
    """Refuse to unpickle a model written by another version of a strict library."""
    recorded = manifest.get("libraries", {})
    installed = library_versions()
    for name in STRICT_LIBRARIES:
        if recorded.get(name) != installed.get(name):
            raise BundleError(
                f"{where} was written with {name} {recorded.get(name)!r} but "
                f"{installed.get(name)!r} is installed; a pickled model is only reliable "
                f"with the version that wrote it. Install {name}=={recorded.get(name)} or "
                "retrain the model."
            )
