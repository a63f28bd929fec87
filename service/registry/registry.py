"""The model registry: versions of each named model, their roles and their history."""

from __future__ import annotations

import contextlib
import difflib
import os
import shutil
import tempfile
from collections.abc import Callable, Mapping
from pathlib import Path
from typing import Any

from service.errors import BundleError, NotFoundError, RegistryError
from service.registry._files import fsync_dir, locked, write_json_atomic
from service.registry.bundle import (
    LoadedBundle,
    OutOfFold,
    artifact_entry,
    load_bundle,
    read_out_of_fold,
    verify_bundle,
)
from service.registry.manifest import FORMAT_VERSION, MANIFEST_FILE, seal
from service.registry.names import check_name, format_version_id, version_number
from service.registry.state import RegistryState, read_history, record, utc_now

__all__ = ["ModelRegistry"]

BuildBundle = Callable[[Path, str], dict[str, Any]]
"""Writes artifacts into the staging directory and returns the manifest body."""

_STAGING_PREFIX = ".staging-"


class ModelRegistry:
    """Model bundles under ``models_dir/NAME/VERSION/`` with one champion per name.

    Parameters
    ----------
    models_dir : path
        Root directory of the registry; created on the first write.
    """

    def __init__(self, models_dir: Path | str) -> None:
        self.root = Path(models_dir)

    # -- reading -----------------------------------------------------------------------

    def names(self) -> list[str]:
        """Names of the models that have at least one version, sorted."""
        if not self.root.is_dir():
            return []
        found = []
        for entry in self.root.iterdir():
            with contextlib.suppress(NotFoundError):
                if entry.is_dir() and self.versions(check_name(entry.name)):
                    found.append(entry.name)
        return sorted(found)

    def versions(self, name: str) -> list[str]:
        """Version ids of ``name``, oldest first (empty for an unknown name)."""
        directory = self._dir(name)
        if not directory.is_dir():
            return []
        numbered = [
            (number, entry.name)
            for entry in directory.iterdir()
            if entry.is_dir() and (number := version_number(entry.name)) is not None
        ]
        return [version for _, version in sorted(numbered)]

    def champion(self, name: str) -> str | None:
        """The champion version of ``name``, or None."""
        return RegistryState.read(self._dir(name)).champion

    def challenger(self, name: str) -> str | None:
        """The challenger version of ``name``, or None."""
        return RegistryState.read(self._dir(name)).challenger

    def history(self, name: str) -> list[dict[str, Any]]:
        """Every recorded event of ``name`` (created, promoted, ...), oldest first."""
        return read_history(self._dir(name))

    def resolve(self, name: str, version: str | None = None) -> str:
        """``version`` if it exists, or the champion when ``version`` is None."""
        if version is None:
            champion = self.champion(name)
            if champion is None:
                if self.versions(name):
                    hint = f"promote one with `upshot models promote {name} VERSION --reason ...`"
                    raise NotFoundError(f"Model {name!r} has no champion; {hint}.")
                raise NotFoundError(self._unknown_model(name))
            return champion
        if version not in self.versions(name):
            known = self.versions(name)
            raise NotFoundError(
                f"Model {name!r} has no version {version!r}"
                + (f"; its versions are {known}." if known else "; it has no versions yet.")
            )
        return version

    def _unknown_model(self, name: str) -> str:
        known = self.names()
        close = difflib.get_close_matches(name, known, n=1)
        head = f"Model {name!r} has no champion: there is no model of that name in {self.root}"
        if close:
            return f"{head}; did you mean {close[0]!r}? Known models: {known}."
        if known:
            return (
                f"{head} (known models: {known}); fix the name, or train it with "
                f"`upshot train ... --name {name}`."
            )
        return f"{head}, which has no models yet; train one with `upshot train ... --name {name}`."

    def path(self, name: str, version: str | None = None) -> Path:
        """Directory of a version (the champion when ``version`` is None)."""
        return self._dir(name) / self.resolve(name, version)

    def verify(self, name: str, version: str | None = None) -> dict[str, Any]:
        """Verify a version without unpickling it and return its manifest.

        Besides the bundle's own checks, the manifest must have the digest recorded in
        the history when the version was created.
        """
        path = self.path(name, version)
        manifest = verify_bundle(path)
        for event in self.history(name):
            if event.get("action") == "created" and event.get("version") == path.name:
                if event.get("manifest_sha256") != manifest["manifest_sha256"]:
                    raise BundleError(
                        f"{path / MANIFEST_FILE} differs from the manifest recorded when "
                        f"{name}:{path.name} was created; restore the original or retrain."
                    )
        return manifest

    def load(
        self, name: str, version: str | None = None, *, unpickle: bool = True
    ) -> LoadedBundle:
        """Verify, then load a version (the champion when ``version`` is None);
        ``unpickle=False`` stops after verification (the bundle's model is None).

        Raises
        ------
        NotFoundError
            Unknown name or version, or no champion.
        BundleError
            The bundle fails verification; nothing was unpickled.
        """
        self.verify(name, version)
        return load_bundle(self.path(name, version), unpickle=unpickle)

    def out_of_fold(self, name: str, version: str | None = None) -> OutOfFold:
        """The verified out-of-fold predictions of a version."""
        manifest = self.verify(name, version)
        return read_out_of_fold(self.path(name, version), manifest)

    # -- writing -----------------------------------------------------------------------

    def add_version(
        self, name: str, build: BuildBundle, artifacts: Mapping[str, str]
    ) -> tuple[str, Path, dict[str, Any]]:
        """Write a new version atomically and return ``(version, path, manifest)``.

        ``build(staging_dir, version)`` writes the files named in ``artifacts`` (file
        name -> role) plus any report into ``staging_dir`` and returns the manifest
        body. The registry adds name, version, format, artifact hashes and the
        self-digest, then renames the finished directory into place. If anything fails,
        the staging directory is removed and no version appears.
        """
        check_name(name, lookup=False)
        directory = self._dir(name)
        created = not directory.exists()
        directory.mkdir(parents=True, exist_ok=True)
        staging: Path | None = None
        try:
            with locked(directory):
                version = format_version_id(self._next_number(name))
                staging = Path(tempfile.mkdtemp(prefix=_STAGING_PREFIX, dir=directory))
                staging.chmod(0o755)  # mkdtemp makes it owner-only; a service may read it
                manifest = self._stage(staging, name, version, build, artifacts)
                target = directory / version
                os.rename(staging, target)
                staging = None
                fsync_dir(directory)
                record(
                    directory,
                    {
                        "action": "created",
                        "version": version,
                        "manifest_sha256": manifest["manifest_sha256"],
                    },
                )
        except BaseException:
            if staging is not None:
                shutil.rmtree(staging, ignore_errors=True)
            if created:
                _remove_if_unused(directory)
            raise
        return version, target, manifest

    def promote(
        self, name: str, version: str, *, actor: str, reason: str, role: str = "champion"
    ) -> None:
        """Make ``version`` the champion (or, with ``role="challenger"``, the challenger).

        The bundle is verified first; the roles change by one atomic file replace, so
        an interruption leaves the previous roles. The former champion is remembered
        for :meth:`rollback`. Promoting the current champion again changes nothing.
        """
        if role not in ("champion", "challenger"):
            raise RegistryError(f"role={role!r} is not 'champion' or 'challenger'; pick one.")
        directory = self._dir(name)
        version = self.resolve(name, version)
        with locked(directory):
            self.verify(name, version)
            state = RegistryState.read(directory)
            before = state.champion
            if role == "champion":
                if state.champion == version:
                    return
                if state.champion is not None:
                    state.previous.append(state.champion)
                state.champion = version
                if state.challenger == version:
                    state.challenger = None
            else:
                if state.champion == version:
                    raise RegistryError(
                        f"{name}:{version} is the champion; a challenger must be another version."
                    )
                state.challenger = version
            state.write(directory)
            record(
                directory,
                {
                    "action": "promoted" if role == "champion" else "challenger",
                    "version": version,
                    "previous_champion": before,
                    "actor": actor,
                    "reason": reason,
                },
            )

    def rollback(self, name: str, *, actor: str, reason: str) -> str:
        """Make the previous champion the champion again; return its version.

        The previous champion is verified first, so a damaged bundle is never put back
        in service.
        """
        directory = self._dir(name)
        with locked(directory):
            state = RegistryState.read(directory)
            if not state.previous:
                raise RegistryError(
                    f"Model {name!r} has no earlier champion to roll back to; promote a "
                    "specific version with `upshot models promote` instead."
                )
            target = state.previous[-1]
            try:
                self.verify(name, target)
            except (BundleError, NotFoundError) as err:
                raise RegistryError(
                    f"Cannot roll {name!r} back to {target}: {err} Promote another "
                    "verified version instead."
                ) from err
            replaced = state.champion
            state.previous.pop()
            state.champion = target
            if state.challenger == target:
                state.challenger = None
            state.write(directory)
            record(
                directory,
                {
                    "action": "rolled_back",
                    "version": target,
                    "previous_champion": replaced,
                    "actor": actor,
                    "reason": reason,
                },
            )
        return target

    # -- helpers -----------------------------------------------------------------------

    def _dir(self, name: str) -> Path:
        return self.root / check_name(name)

    def _next_number(self, name: str) -> int:
        numbers = [version_number(v) or 0 for v in self.versions(name)]
        numbers += [
            version_number(str(event.get("version"))) or 0
            for event in self.history(name)
            if event.get("action") == "created"
        ]
        return max(numbers, default=0) + 1

    def _stage(
        self,
        staging: Path,
        name: str,
        version: str,
        build: BuildBundle,
        artifacts: Mapping[str, str],
    ) -> dict[str, Any]:
        body = build(staging, version)
        manifest = {
            **body,
            "format_version": FORMAT_VERSION,
            "name": name,
            "version": version,
            "created_at": body.get("created_at", utc_now()),
            "artifacts": {
                file: artifact_entry(staging / file, role) for file, role in artifacts.items()
            },
        }
        sealed = seal(manifest)
        write_json_atomic(staging / MANIFEST_FILE, sealed)
        _fsync_tree(staging)
        return sealed


def _fsync_tree(root: Path) -> None:
    """Flush every file and directory under ``root`` to disk."""
    for directory, _, files in os.walk(root):
        for file in files:
            fd = os.open(Path(directory) / file, os.O_RDONLY)
            try:
                os.fsync(fd)
            finally:
                os.close(fd)
        fsync_dir(Path(directory))


def _remove_if_unused(directory: Path) -> None:
    """Remove a model directory this call created if nothing but its lock is in it."""
    leftovers = [p for p in directory.iterdir() if p.name != ".lock"]
    if not leftovers:
        with contextlib.suppress(OSError):
            (directory / ".lock").unlink()
            directory.rmdir()
