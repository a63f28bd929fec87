"""Databases on the test PostgreSQL server: create, drop, empty."""

from __future__ import annotations

import uuid
from urllib.parse import urlsplit, urlunsplit

__all__ = ["clear_postgres", "create_database", "drop_database"]


def create_database(admin_url: str) -> str:
    """A new empty database on the server; its URL."""
    import psycopg

    name = f"upshot_{uuid.uuid4().hex[:12]}"
    with psycopg.connect(admin_url, autocommit=True) as conn:
        conn.execute(f"CREATE DATABASE {name}")  # type: ignore[call-overload]
    parts = urlsplit(admin_url)
    return urlunsplit((parts.scheme, parts.netloc, f"/{name}", parts.query, ""))


def drop_database(admin_url: str, url: str) -> None:
    """Drop a database made by :func:`create_database`."""
    import psycopg

    name = urlsplit(url).path.lstrip("/")
    with psycopg.connect(admin_url, autocommit=True) as conn:
        conn.execute(f"DROP DATABASE IF EXISTS {name} WITH (FORCE)")  # type: ignore[call-overload]


def clear_postgres(url: str) -> None:
    """Empty the store's tables (if any), keeping the schema."""
    import psycopg

    with psycopg.connect(url, autocommit=True) as conn:
        found = conn.execute("SELECT to_regclass('decisions') IS NOT NULL").fetchone()
        if found and found[0]:
            conn.execute("TRUNCATE decisions, outcomes, outcome_corrections")
