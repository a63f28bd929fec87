"""Serving forms of a bundle: which ones it has, which one serves, and loading them.

``manifest["serving"]`` records the forms a version can be scored with::

    {"default": "compact",
     "forms": {"full": {"kind": "full", "file": "model.joblib", "sha256": ...},
               "compact": {"kind": "compact", "status": "built", "file": "compact.npz",
                           "sha256": ..., "method": {...}, "fidelity": {...}}}}

*full* is the fitted model with every bootstrap refit (a pickle, loaded only after
verification); *compact* is the full-data fit plus a model of the bootstrap spread,
stored as plain arrays (``service.uplift.compact``), present only when its fidelity
passed at training time (otherwise ``status`` is ``"refused"`` with the reason).
Bundles written before compact forms existed list only ``{"joblib": ...}`` and serve
the full form.
"""

from __future__ import annotations

from pathlib import Path
from typing import Any

from service.errors import BundleError, DataError
from service.registry._files import sha256_file
from service.uplift.compact import load_form
from service.uplift.compiled import CompiledUplift

__all__ = [
    "COMPACT_FILE",
    "FORMS",
    "check_form",
    "compact_entry",
    "form_record",
    "load_compact",
    "pick_form",
]

COMPACT_FILE = "compact.npz"
FORMS = ("compact", "full")


def check_form(form: str) -> str:
    """``form`` if it names a serving form, else a :class:`DataError` naming the choices."""
    if form not in FORMS:
        raise DataError(f"form={form!r} is not a serving form; choose one of {list(FORMS)}.")
    return form


def compact_entry(manifest: dict[str, Any]) -> dict[str, Any] | None:
    """The manifest's record of a *built* compact form, or None."""
    entry = manifest.get("serving", {}).get("forms", {}).get("compact")
    if isinstance(entry, dict) and entry.get("status") == "built":
        return entry
    return None


def pick_form(manifest: dict[str, Any], requested: str = "compact") -> tuple[str, str]:
    """The form that serves when ``requested`` is asked for, and why (for logs).

    The compact form serves when asked for and built; otherwise the full form does.
    """
    if check_form(requested) == "full":
        return "full", "the full form was asked for"
    if compact_entry(manifest) is not None:
        return "compact", "the compact form was built and passed its fidelity checks"
    entry = manifest.get("serving", {}).get("forms", {}).get("compact")
    if isinstance(entry, dict) and entry.get("reason"):
        return "full", f"no compact form: {entry['reason']}"
    return "full", "no compact form (the bundle predates compact forms or has none)"


def load_compact(path: Path, manifest: dict[str, Any]) -> CompiledUplift:
    """Load the compact form of the *verified* bundle at ``path`` (no unpickling).

    The file's SHA-256 is checked again against the form's own record, so a form that
    is not also listed among the manifest's artifacts is still never read unchecked.
    """
    entry = compact_entry(manifest)
    if entry is None:
        raise BundleError(
            f"{path} has no compact serving form; serve the full form (`--form full`) or "
            "retrain the model."
        )
    file = entry.get("file")
    artifacts = manifest.get("artifacts", {})
    if file != COMPACT_FILE or artifacts.get(file, {}).get("sha256") != entry.get("sha256"):
        raise BundleError(
            f"The compact form record of {path} does not match its artifacts; the manifest "
            "is not trustworthy, retrain the model."
        )
    if sha256_file(path / file) != entry["sha256"]:
        raise BundleError(
            f"{path / file} does not match the SHA-256 recorded in its manifest, so it was "
            "changed or damaged after training and will not be loaded; restore the original "
            "file or serve the full form (`--form full`)."
        )
    compiled = load_form(path / file)
    if [str(a) for a in compiled.arms_] != [str(a) for a in manifest["arms"]]:
        raise BundleError(
            f"The compact form in {path} predicts arms {compiled.arms_} but the manifest "
            f"lists {manifest['arms']}; the bundle is inconsistent, retrain it."
        )
    return compiled


def form_record(kind: str, file: Path, **extra: Any) -> dict[str, Any]:
    """The manifest record of a form written to ``file``."""
    return {"kind": kind, "file": file.name, "sha256": sha256_file(file), **extra}
