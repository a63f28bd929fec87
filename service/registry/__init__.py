"""Versioned model bundles: verified loading, champion/challenger roles, history.

``models/NAME/VERSION/`` holds ``manifest.json`` and the artifacts; every artifact's
SHA-256 and the manifest's own digest are checked before anything is unpickled.
``models/NAME/state.json`` names the champion and challenger (replaced atomically) and
``models/NAME/history.jsonl`` records who changed what, when and why (append-only).
"""

from __future__ import annotations

from service.registry.bundle import (
    MODEL_FILE,
    OOF_FILE,
    REPORT_DIR,
    LoadedBundle,
    OutOfFold,
    load_bundle,
    read_out_of_fold,
    verify_bundle,
    write_out_of_fold,
)
from service.registry.manifest import FORMAT_VERSION, MANIFEST_FILE, library_versions
from service.registry.names import check_name, parse_ref
from service.registry.reference import bin_shares, categorical_reference, numeric_reference
from service.registry.registry import ModelRegistry

__all__ = [
    "FORMAT_VERSION",
    "MANIFEST_FILE",
    "MODEL_FILE",
    "OOF_FILE",
    "REPORT_DIR",
    "LoadedBundle",
    "ModelRegistry",
    "OutOfFold",
    "bin_shares",
    "categorical_reference",
    "check_name",
    "library_versions",
    "load_bundle",
    "numeric_reference",
    "parse_ref",
    "read_out_of_fold",
    "verify_bundle",
    "write_out_of_fold",
]
