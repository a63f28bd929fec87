"""Durable file operations: atomic JSON replace, fsync'd appends, hashing, a name lock.

A crash at any point leaves either the old file or the new one, never a mix: new content
goes to a temporary file in the same directory, is flushed to disk, and then replaces the
old file with ``os.replace`` (atomic on POSIX), after which the directory entry is synced.
"""

from __future__ import annotations

import contextlib
import fcntl
import hashlib
import json
import os
import tempfile
from collections.abc import Iterator
from pathlib import Path
from typing import Any

__all__ = ["append_json_line", "fsync_dir", "locked", "sha256_file", "write_json_atomic"]

_CHUNK = 1 << 20


def sha256_file(path: Path) -> str:
    """Hex SHA-256 of a file's bytes, read in chunks."""
    digest = hashlib.sha256()
    with path.open("rb") as handle:
        while chunk := handle.read(_CHUNK):
            digest.update(chunk)
    return digest.hexdigest()


def fsync_dir(path: Path) -> None:
    """Flush a directory entry (a rename or a new file in it) to disk."""
    fd = os.open(path, os.O_RDONLY)
    try:
        os.fsync(fd)
    finally:
        os.close(fd)


def write_json_atomic(path: Path, data: Any) -> None:
    """Replace ``path`` with ``data`` as JSON so readers see the old or the new file whole."""
    fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".tmp", dir=path.parent)
    try:
        os.fchmod(fd, 0o644)  # mkstemp makes it owner-only; a service may read it
        with os.fdopen(fd, "w", encoding="utf-8") as handle:
            json.dump(data, handle, indent=2, sort_keys=True)
            handle.write("\n")
            handle.flush()
            os.fsync(handle.fileno())
        os.replace(tmp, path)
    except BaseException:
        with contextlib.suppress(FileNotFoundError):
            os.unlink(tmp)
        raise
    fsync_dir(path.parent)


def append_json_line(path: Path, record: dict[str, Any]) -> None:
    """Append one JSON object as a line and flush it to disk before returning."""
    line = json.dumps(record, sort_keys=True, separators=(",", ":")) + "\n"
    with path.open("a+b") as handle:
        # A line torn by an earlier crash must not swallow this one.
        if handle.seek(0, os.SEEK_END) > 0:
            handle.seek(-1, os.SEEK_END)
            if handle.read(1) != b"\n":
                line = "\n" + line
        handle.write(line.encode("utf-8"))
        handle.flush()
        os.fsync(handle.fileno())


@contextlib.contextmanager
def locked(directory: Path) -> Iterator[None]:
    """Hold an exclusive lock on ``directory`` (a ``.lock`` file inside it) while inside.

    Serialises writers of one model name across processes on one host (and on shared
    file systems that honour ``flock``).
    """
    handle = (directory / ".lock").open("a")
    try:
        fcntl.flock(handle.fileno(), fcntl.LOCK_EX)
        yield
    finally:
        fcntl.flock(handle.fileno(), fcntl.LOCK_UN)
        handle.close()
