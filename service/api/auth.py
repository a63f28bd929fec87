"""API keys: bearer tokens checked against stored SHA-256 digests, with roles.

A key is sent as ``Authorization: Bearer <key>``. The service keeps only digests
(``sha256(key)``), so a leaked configuration does not leak keys. Roles are ordered:
``analyst`` keys may do everything ``scorer`` keys may, and ``admin`` keys everything.
Without any configured key, authentication is off: the settings then refuse any host but
loopback, and start-up logs a loud warning.
"""

from __future__ import annotations

import hashlib
import hmac
import secrets
from collections.abc import Sequence
from dataclasses import dataclass

from service.api.errors import ApiError
from service.config import ROLES, ApiKey

__all__ = ["KeyRing", "Principal", "hash_key", "new_key"]

_PREFIX = "ups_"
_RANK = {role: rank for rank, role in enumerate(ROLES)}


@dataclass(frozen=True)
class Principal:
    """Who made a request: the key's name (for audit trails) and its role."""

    name: str
    role: str

    def allows(self, role: str) -> bool:
        """Whether this principal may act in ``role``."""
        return _RANK[self.role] >= _RANK[role]


ANONYMOUS = Principal(name="anonymous-loopback", role="admin")


def hash_key(key: str) -> str:
    """The hex SHA-256 digest under which a key is stored."""
    return hashlib.sha256(key.encode("utf-8")).hexdigest()


def new_key() -> str:
    """A fresh random key (256 bits, URL-safe)."""
    return _PREFIX + secrets.token_urlsafe(32)


class KeyRing:
    """The configured keys, looked up by digest."""

    def __init__(self, keys: Sequence[ApiKey]) -> None:
        unknown = {k.role for k in keys} - set(ROLES)
        if unknown:
            raise ValueError(f"Unknown role(s) {sorted(unknown)}; use one of {list(ROLES)}.")
        self._by_digest = {k.digest: Principal(k.name, k.role) for k in keys}

    @property
    def enabled(self) -> bool:
        """Whether any key is configured (authentication is on)."""
        return bool(self._by_digest)

    def authenticate(self, authorization: str | None) -> Principal | None:
        """The principal of an ``Authorization`` header value, or None if it is not valid."""
        if not self.enabled:
            return ANONYMOUS
        if authorization is None:
            return None
        scheme, _, token = authorization.partition(" ")
        if scheme.lower() != "bearer" or not token.strip():
            return None
        digest = hash_key(token.strip())
        for known, principal in self._by_digest.items():
            if hmac.compare_digest(known, digest):
                return principal
        return None

    def require(self, authorization: str | None, role: str) -> Principal:
        """The caller's principal, or an :class:`ApiError`: 401 without a valid key, 403
        when the key's role does not allow ``role``."""
        principal = self.authenticate(authorization)
        if principal is None:
            raise ApiError(
                401,
                "unauthorized",
                "A valid API key is required; send it as `Authorization: Bearer <key>`.",
                headers={"WWW-Authenticate": "Bearer"},
            )
        if not principal.allows(role):
            raise ApiError(
                403,
                "forbidden",
                f"API key {principal.name!r} has role {principal.role!r}, but this endpoint "
                f"needs {role!r}; use a key with that role.",
            )
        return principal
