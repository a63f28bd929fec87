"""The outcome type of the model behind a decision, read from the registry's manifests."""

from __future__ import annotations

import functools
import json

from service.decisions import OutcomeKinds
from service.decisions.outcomes import OUTCOME_TYPES
from service.errors import UpshotError
from service.registry import MANIFEST_FILE, ModelRegistry

__all__ = ["registry_outcome_kinds"]


def registry_outcome_kinds(registry: ModelRegistry) -> OutcomeKinds:
    """(model name, version) -> ``"binary"``/``"continuous"`` from the version's manifest,
    or None when the version or its outcome type is unknown (then only the amount bound
    applies). Manifests are read once per version."""

    @functools.cache
    def kind(name: str, version: str) -> str | None:
        try:
            path = registry.path(name, version) / MANIFEST_FILE
            manifest = json.loads(path.read_text(encoding="utf-8"))
        except (UpshotError, OSError, ValueError):
            return None
        found = manifest.get("outcome_type") if isinstance(manifest, dict) else None
        return found if found in OUTCOME_TYPES else None

    return kind
