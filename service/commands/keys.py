"""``upshot keys``: make API keys for the scoring service."""

from __future__ import annotations

import argparse
import re
from typing import Any

from service.config import ROLES
from service.errors import ConfigError

__all__ = ["register"]

_NAME = re.compile(r"^[A-Za-z0-9_.-]{1,64}$")


def register(subparsers: Any) -> None:
    """Add ``keys`` to the ``upshot`` sub-commands."""
    parser = subparsers.add_parser(
        "keys",
        help="make API keys for the scoring service",
        description="API keys are bearer tokens with a role (scorer, analyst or admin). The "
        "service stores only their SHA-256 digest, in UPSHOT_API_KEYS or UPSHOT_API_KEYS_FILE.",
    )
    actions = parser.add_subparsers(title="actions", metavar="ACTION", required=True)
    new = actions.add_parser("new", help="print a fresh key and the entry to configure")
    new.add_argument("--name", required=True, help="who uses it, e.g. crm (kept in audit logs)")
    new.add_argument("--role", required=True, choices=list(ROLES))
    new.set_defaults(handler=_new)


def _new(args: argparse.Namespace) -> int:
    from service.api.auth import hash_key, new_key

    if not _NAME.match(args.name):
        raise ConfigError(
            f"Key name {args.name!r} must be 1-64 letters, digits, '.', '_' or '-'; pick another."
        )
    key = new_key()
    print("key (give it to the client; it is shown once and stored nowhere):")
    print(f"  {key}")
    print("entry for UPSHOT_API_KEYS (comma separated) or UPSHOT_API_KEYS_FILE (one per line):")
    print(f"  {args.name}:{args.role}:{hash_key(key)}")
    return 0
