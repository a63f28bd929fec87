"""Which version of a model is champion (and challenger), and the history of changes.

``models/NAME/state.json`` holds the current roles and the stack of earlier champions
(for rollback); it is replaced atomically, so a crash leaves the old roles in place.
``models/NAME/history.jsonl`` gets one JSON line per event (created, promoted,
challenger, rolled_back), appended and flushed to disk after the state is replaced; it
is never rewritten.
"""

from __future__ import annotations

import json
import logging
from dataclasses import asdict, dataclass, field
from datetime import UTC, datetime
from pathlib import Path
from typing import Any

from service.errors import RegistryError
from service.registry._files import append_json_line, write_json_atomic

__all__ = ["HISTORY_FILE", "STATE_FILE", "RegistryState", "read_history", "record", "utc_now"]

logger = logging.getLogger(__name__)

STATE_FILE = "state.json"
HISTORY_FILE = "history.jsonl"


def utc_now() -> str:
    """The current time as an ISO 8601 UTC timestamp, e.g. ``2025-01-31T09:15:02Z``."""
    return datetime.now(UTC).strftime("%Y-%m-%dT%H:%M:%S.%fZ")


@dataclass
class RegistryState:
    """Current roles of one model name."""

    champion: str | None = None
    challenger: str | None = None
    previous: list[str] = field(default_factory=list)  # earlier champions, oldest first

    @classmethod
    def read(cls, directory: Path) -> RegistryState:
        path = directory / STATE_FILE
        try:
            data = json.loads(path.read_text(encoding="utf-8"))
        except FileNotFoundError:
            return cls()
        except json.JSONDecodeError as err:
            raise RegistryError(
                f"{path} is not valid JSON ({err.msg}); restore it from backup, or rebuild "
                "it from the last lines of history.jsonl in the same directory."
            ) from err
        try:
            return cls(data["champion"], data["challenger"], list(data["previous"]))
        except (KeyError, TypeError) as err:
            raise RegistryError(
                f"{path} lacks the field {err}; restore it from backup or rebuild it from "
                "history.jsonl in the same directory."
            ) from err

    def write(self, directory: Path) -> None:
        write_json_atomic(directory / STATE_FILE, asdict(self))


def record(directory: Path, event: dict[str, Any]) -> dict[str, Any]:
    """Append ``event`` (stamped with the time) to the history and return it."""
    stamped = {"at": utc_now(), **event}
    append_json_line(directory / HISTORY_FILE, stamped)
    return stamped


def read_history(directory: Path) -> list[dict[str, Any]]:
    """All recorded events, oldest first.

    A line torn by a crash during its append is skipped (and logged); the events
    around it are kept.
    """
    path = directory / HISTORY_FILE
    try:
        lines = path.read_text(encoding="utf-8").splitlines()
    except FileNotFoundError:
        return []
    events = []
    for number, line in enumerate(lines, start=1):
        if not line.strip():
            continue
        try:
            event = json.loads(line)
        except json.JSONDecodeError:
            logger.warning("Skipping torn line %d of %s", number, path)
            continue
        if isinstance(event, dict):
            events.append(event)
    return events
