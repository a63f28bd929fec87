"""Service settings: one object, read once from ``UPSHOT_*`` environment variables.

:func:`load_settings` is the one entry point; it refuses unsafe values with a
:class:`~service.errors.ConfigError` whose message names the variable and the fix. The
settings are then passed down as arguments, never read again from the environment.
"""

from __future__ import annotations

import ipaddress
import re
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Literal

from pydantic import Field, SecretStr, ValidationError, field_validator
from pydantic_settings import BaseSettings, SettingsConfigDict

from service.errors import ConfigError

__all__ = ["ROLES", "ApiKey", "Settings", "is_loopback", "load_settings", "parse_api_keys"]

ROLES = ("scorer", "analyst", "admin")
"""API key roles: ``scorer`` scores and lists, ``analyst`` also reads the heavy reports
over the decision log (realized lift), ``admin`` may do everything."""

_DIGEST = re.compile(r"^[0-9a-f]{64}$")
_MIB = 1024 * 1024


@dataclass(frozen=True)
class ApiKey:
    """One configured API key: a name for the audit trail, a role, the SHA-256 of the key."""

    name: str
    role: str
    digest: str


class Settings(BaseSettings):
    """Everything the scoring service reads at start-up (environment prefix ``UPSHOT_``).

    API keys are given as entries ``name:role:sha256hex`` separated by commas or new
    lines, in ``UPSHOT_API_KEYS`` and/or a file named by ``UPSHOT_API_KEYS_FILE`` (one
    entry per line, ``#`` starts a comment). Only the SHA-256 digest of a key is ever
    stored; ``upshot keys new`` prints a fresh key and its entry.

    Bounds on work: ``max_in_flight`` requests in progress per worker (beyond it 503 with
    ``Retry-After`` at once), ``max_heavy_reads`` concurrent reads over the decision log
    (realized lift; beyond it 429 with ``Retry-After``), and ``lift_window_days``, the
    window a lift report covers when the request names no ``since``.
    """

    model_config = SettingsConfigDict(env_prefix="UPSHOT_", frozen=True, extra="forbid")

    models_dir: Path = Path("models")
    campaigns_file: Path = Path("campaigns/larkspur.toml")
    decision_log: str = "var/decisions.sqlite3"
    host: str = "127.0.0.1"
    port: int = Field(8000, ge=1, le=65535)
    api_keys: SecretStr | None = None
    api_keys_file: Path | None = None
    max_body_bytes: int = Field(64 * _MIB, ge=1024, le=1024 * _MIB)
    max_batch: int = Field(100_000, ge=1, le=1_000_000)
    max_in_flight: int = Field(32, ge=1, le=100_000)
    max_heavy_reads: int = Field(2, ge=1, le=64)
    lift_window_days: int = Field(30, ge=1, le=3660)
    compiled: bool = True
    # Replicas: how often each one polls the registry and the campaign file (0: never).
    sync_seconds: float = Field(2.0, ge=0.0, le=3600.0)
    form: Literal["compact", "full"] = "compact"
    log_level: Literal["debug", "info", "warning", "error"] = "info"

    @field_validator("decision_log")
    @classmethod
    def _durable_log(cls, value: str) -> str:
        # A SQLite file path or a postgresql:// URL; in-memory databases are refused.
        from service.decisions.location import parse_location

        try:
            parse_location(value)
        except ConfigError as err:
            raise ValueError(str(err)) from None
        return value

    def keys(self) -> list[ApiKey]:
        """The configured API keys (environment entries first, then the file's)."""
        text = self.api_keys.get_secret_value() if self.api_keys is not None else ""
        keys = parse_api_keys(text, source="UPSHOT_API_KEYS")
        if self.api_keys_file is not None:
            keys += parse_api_keys(_read_keys_file(self.api_keys_file), str(self.api_keys_file))
        return keys


def load_settings(**overrides: Any) -> Settings:
    """Read the settings once from the environment (``overrides`` win) and check them.

    Raises
    ------
    ConfigError
        A value is malformed or unsafe: an in-memory log, a malformed API key entry, or
        a non-loopback ``UPSHOT_HOST`` while no API key is configured.
    """
    try:
        settings = Settings(**overrides)
    except ValidationError as err:
        problems = "; ".join(
            f"UPSHOT_{'_'.join(str(p) for p in e['loc']).upper()}: {e['msg']}"
            for e in err.errors()
        )
        raise ConfigError(
            f"Invalid settings: {problems}. Fix the environment variable(s)."
        ) from err
    keys = settings.keys()
    if not keys and not is_loopback(settings.host):
        raise ConfigError(
            f"UPSHOT_HOST={settings.host!r} would expose the service without any API key; "
            "configure keys in UPSHOT_API_KEYS or UPSHOT_API_KEYS_FILE (see `upshot keys "
            "new`), or bind to 127.0.0.1."
        )
    return settings


def is_loopback(host: str) -> bool:
    """Whether ``host`` only accepts connections from this machine."""
    if host == "localhost":
        return True
    try:
        return ipaddress.ip_address(host).is_loopback
    except ValueError:
        return False


def parse_api_keys(text: str, source: str) -> list[ApiKey]:
    """Parse ``name:role:sha256hex`` entries separated by commas or new lines."""
    keys: list[ApiKey] = []
    for raw in re.split(r"[,\n]", text):
        entry = raw.split("#", 1)[0].strip()
        if entry:
            keys.append(_parse_entry(entry, source))
    names = [k.name for k in keys]
    duplicates = sorted({n for n in names if names.count(n) > 1})
    if duplicates:
        raise ConfigError(f"API key name(s) {duplicates} appear twice in {source}; rename one.")
    return keys


def _parse_entry(entry: str, source: str) -> ApiKey:
    parts = entry.split(":")
    if len(parts) != 3:
        raise ConfigError(
            f"API key entry {_redact(entry)!r} in {source} is not 'name:role:sha256hex'; "
            "store the SHA-256 digest of the key, never the key itself."
        )
    name, role, digest = (p.strip() for p in parts)
    if role not in ROLES:
        raise ConfigError(
            f"API key {name!r} in {source} has role {role!r}; use one of {list(ROLES)}."
        )
    if not _DIGEST.match(digest.lower()):
        raise ConfigError(
            f"API key {name!r} in {source} does not end in a 64-digit hex SHA-256 digest; "
            "store sha256(key) as printed by `upshot keys new`, not the key itself."
        )
    return ApiKey(name=name, role=role, digest=digest.lower())


def _redact(entry: str) -> str:
    return entry if len(entry) <= 12 else entry[:12] + "..."


def _read_keys_file(path: Path) -> str:
    try:
        return path.read_text(encoding="utf-8")
    except OSError as err:
        raise ConfigError(
            f"UPSHOT_API_KEYS_FILE={str(path)!r} cannot be read ({err.strerror}); fix the "
            "path or its permissions."
        ) from err
