"""Model names and version ids.

A model name is 1-64 characters of letters, digits, ``_``, ``-`` and ``.``, starting with
a letter or digit, so it is always a single, safe directory name. Version ids are ``v``
followed by a zero-padded counter (``v0001``, ``v0002``, ...); they sort by their number
(``v10000`` comes after ``v9999``), and the registry never reuses one.
"""

from __future__ import annotations

import re

from service.errors import DataError, NotFoundError

__all__ = ["format_version_id", "check_name", "parse_ref", "version_number"]

_NAME = re.compile(r"^[A-Za-z0-9][A-Za-z0-9_.-]{0,63}$")
_VERSION = re.compile(r"^v(\d{4,})$")


def check_name(name: str, *, lookup: bool = True) -> str:
    """Return ``name`` if it is a valid model name, else raise.

    ``lookup=True`` raises :class:`NotFoundError` (no such model can exist);
    ``lookup=False`` raises :class:`DataError` (the caller is naming a new model).
    """
    if isinstance(name, str) and _NAME.match(name) and ".." not in name:
        return name
    error = NotFoundError if lookup else DataError
    raise error(
        f"Model name {name!r} is not valid; use 1-64 letters, digits, '_', '-' or '.', "
        "starting with a letter or digit (e.g. 'larkspur-retention')."
    )


def version_number(version: str) -> int | None:
    """The counter of a version id such as ``v0007``, or None if it is not one."""
    match = _VERSION.match(version) if isinstance(version, str) else None
    return int(match.group(1)) if match else None


def format_version_id(number: int) -> str:
    """``7 -> "v0007"``."""
    return f"v{number:04d}"


def parse_ref(ref: str) -> tuple[str, str | None]:
    """Split ``NAME`` or ``NAME:VERSION`` into ``(name, version or None)``."""
    name, _, version = ref.partition(":")
    return check_name(name), (version or None)
