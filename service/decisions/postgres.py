"""The decision store on PostgreSQL, for several replicas sharing one log.

psycopg 3: a connection pool for reads and outcome writes, and one dedicated connection
for the group-commit writer (``synchronous_commit = on``, so a COMMIT returns only once
the transaction is durable on the server). Large append calls go through COPY into a
temporary table and then ``INSERT ... ON CONFLICT DO NOTHING``, which keeps the first
record of an id also against another process appending the same id at the same time.
The password may come from the URL or from the standard libpq environment variables
(``PGPASSWORD``, ``PGPASSFILE``, ...).
"""

from __future__ import annotations

import logging
from collections.abc import Iterable, Iterator, Sequence
from contextlib import contextmanager
from typing import Any

import psycopg
import psycopg.errors
from psycopg_pool import ConnectionPool, PoolTimeout

from service.decisions.location import redact
from service.decisions.migrations import MIGRATIONS, SCHEMA_VERSION
from service.decisions.record import COLUMNS, utc_now
from service.decisions.store import DecisionLog, Tx, window_clauses
from service.decisions.writer import Rejected, Row
from service.errors import ConfigError, DecisionLogError

__all__ = ["PostgresLog", "migrate_postgres"]

logger = logging.getLogger(__name__)

# Advisory lock keys (arbitrary constants, "upsh" in ASCII plus one).
_MIGRATE_LOCK = 0x75707368
_OUTCOMES_LOCK = 0x75707369
# At or above this many rows per append call, go through COPY (bench/decision_log.py
# --copy: 1.7-2.1x the row-by-row INSERT rate at 100 rows a call, 4.6-5.6x at 1,000; smaller
# calls, a single score most of all, keep the plain INSERT).
_COPY_MIN = 64
_CONNECT_TIMEOUT_S = 10

_NAMES = ", ".join(COLUMNS)
_INSERT = (
    f"INSERT INTO decisions ({_NAMES}) VALUES ({', '.join('%s' for _ in COLUMNS)}) "
    "ON CONFLICT (decision_id) DO NOTHING"
)
_STAGE = (
    "CREATE TEMP TABLE IF NOT EXISTS decisions_in "
    "(LIKE decisions INCLUDING DEFAULTS) ON COMMIT DELETE ROWS"
)
_FROM_STAGE = (
    f"INSERT INTO decisions ({_NAMES}) SELECT {_NAMES} FROM decisions_in "
    "ON CONFLICT (decision_id) DO NOTHING"
)
_REJECTED = (psycopg.errors.IntegrityError, psycopg.errors.DataError)


def _connect(url: str, *, autocommit: bool) -> psycopg.Connection[Any]:
    try:
        return psycopg.connect(url, autocommit=autocommit, connect_timeout=_CONNECT_TIMEOUT_S)
    except psycopg.OperationalError as err:
        raise DecisionLogError(
            f"Cannot connect to the decision log at {redact(url)!r} ({_first_line(err)}); "
            "check the host, port, database, user and password (in the URL or PGPASSWORD)."
        ) from err


def _first_line(err: BaseException) -> str:
    return str(err).strip().splitlines()[0] if str(err).strip() else type(err).__name__


def migrate_postgres(url: str) -> list[int]:
    """Apply the missing schema steps in one transaction; return the versions applied.

    An advisory lock makes replicas that start together apply them once.
    """
    with _connect(url, autocommit=True) as conn, conn.transaction():
        conn.execute("SELECT pg_advisory_xact_lock(%s)", (_MIGRATE_LOCK,))
        conn.execute(
            "CREATE TABLE IF NOT EXISTS upshot_schema (version INTEGER PRIMARY KEY, "
            "description TEXT NOT NULL, applied_at TEXT NOT NULL)"
        )
        row = conn.execute("SELECT COALESCE(MAX(version), 0) FROM upshot_schema").fetchone()
        version = int(row[0]) if row else 0
        if version > SCHEMA_VERSION:
            raise ConfigError(
                f"Decision log {redact(url)!r} has schema version {version}, newer than "
                f"this upshot ({SCHEMA_VERSION}); upgrade upshot."
            )
        applied = []
        for step in MIGRATIONS:
            if step.version > version:
                for statement in (s.strip() for s in step.postgres.split(";")):
                    if statement:
                        conn.execute(statement)  # type: ignore[call-overload]
                conn.execute(
                    "INSERT INTO upshot_schema (version, description, applied_at) "
                    "VALUES (%s, %s, %s)",
                    (step.version, step.description, utc_now()),
                )
                applied.append(step.version)
        return applied


class PostgresLog(DecisionLog):
    """The decision log in a PostgreSQL database (``postgresql://...``)."""

    engine = "postgresql"

    def __init__(
        self, url: str, *, group_limit: int = 1000, pool_min: int = 1, pool_max: int = 4
    ) -> None:
        super().__init__(redact(url), group_limit=group_limit)
        self.url = url
        migrate_postgres(url)
        self._pool = ConnectionPool(
            url,
            min_size=pool_min,
            max_size=pool_max,
            kwargs={"connect_timeout": _CONNECT_TIMEOUT_S},
            check=ConnectionPool.check_connection,
            name="upshot-decision-log",
            timeout=_CONNECT_TIMEOUT_S,
            open=True,
        )

    def schema_version(self) -> int:
        with self._read() as tx:
            return int(tx.rows("SELECT MAX(version) FROM upshot_schema")[0][0])

    def _open_sink(self) -> _PostgresSink:
        return _PostgresSink(self.url)

    @contextmanager
    def _connection(self) -> Iterator[psycopg.Connection[Any]]:
        self._check_open()
        try:
            with self._pool.connection() as conn:
                yield conn
        except (PoolTimeout, psycopg.OperationalError) as err:
            raise DecisionLogError(
                f"The decision log at {self.where!r} is unreachable ({_first_line(err)}); "
                "check the database server and the network, then retry."
            ) from err

    @contextmanager
    def _read(self) -> Iterator[Tx]:
        with self._connection() as conn:
            conn.read_only = True
            try:
                yield _PostgresTx(conn)
            finally:
                conn.rollback()
                conn.read_only = False

    @contextmanager
    def _write(self) -> Iterator[Tx]:
        # The pool's connection context commits on success and rolls back on an error.
        with self._connection() as conn:
            conn.execute("SELECT pg_advisory_xact_lock(%s)", (_OUTCOMES_LOCK,))
            yield _PostgresTx(conn)

    def _stream(
        self, sql: str, params: Sequence[Any], chunk: int
    ) -> Iterator[list[tuple[Any, ...]]]:
        with self._connection() as conn, conn.cursor(name="upshot_rows") as cursor:
            cursor.itersize = chunk
            cursor.execute(_marks(sql), list(params))
            while rows := cursor.fetchmany(chunk):
                yield rows

    def _feature_types(
        self, campaign: str, since: str | None, until: str | None, with_outcome: bool
    ) -> Iterable[tuple[str, str]]:
        clauses, params = window_clauses(campaign, since, until)
        if with_outcome:
            clauses.append("EXISTS (SELECT 1 FROM outcomes o WHERE o.decision_id = d.decision_id)")
        sql = (
            "SELECT DISTINCT f.key, jsonb_typeof(f.value) FROM decisions d, "
            f"jsonb_each(d.features::jsonb) AS f WHERE {' AND '.join(clauses)}"
        )
        with self._read() as tx:
            return [(row[0], row[1]) for row in tx.rows(sql, params)]

    def _close_connections(self) -> None:
        self._pool.close()


def _marks(sql: str) -> str:
    # The store writes its SQL with ? placeholders (none appears inside a literal).
    return sql.replace("?", "%s")


class _PostgresTx:
    def __init__(self, conn: psycopg.Connection[Any]) -> None:
        self._conn = conn

    def rows(self, sql: str, params: Sequence[Any] = ()) -> list[tuple[Any, ...]]:
        return self._conn.execute(_marks(sql), list(params)).fetchall()  # type: ignore[call-overload,no-any-return]

    def run(self, sql: str, params: Sequence[Any] = ()) -> int:
        return self._conn.execute(_marks(sql), list(params)).rowcount  # type: ignore[call-overload,no-any-return]

    def many(self, sql: str, params: Sequence[Sequence[Any]]) -> None:
        if params:
            with self._conn.cursor() as cursor:
                cursor.executemany(_marks(sql), params)  # type: ignore[arg-type]


class _PostgresSink:
    """The writer thread's own connection; reconnects when the server dropped it."""

    def __init__(self, url: str) -> None:
        self._url = url
        self._live: psycopg.Connection[Any] | None = None  # connected at the first commit

    @property
    def _conn(self) -> psycopg.Connection[Any]:
        if self._live is None or self._live.closed or self._live.broken:
            self._live = _connect(self._url, autocommit=True)
            self._live.execute("SET synchronous_commit = on")
        return self._live

    def begin(self) -> None:
        self._conn.execute("BEGIN")

    def insert(self, rows: list[Row]) -> int:
        conn = self._conn
        conn.execute("SAVEPOINT job")
        try:
            with conn.cursor() as cursor:
                if len(rows) >= _COPY_MIN:
                    cursor.execute(_STAGE)
                    cursor.execute("TRUNCATE decisions_in")
                    with cursor.copy(f"COPY decisions_in ({_NAMES}) FROM STDIN") as copy:
                        for row in rows:
                            copy.write_row(row)
                    cursor.execute(_FROM_STAGE)
                    inserted = cursor.rowcount
                else:
                    inserted = 0
                    for row in rows:
                        cursor.execute(_INSERT, row)
                        inserted += cursor.rowcount
        except _REJECTED as err:
            conn.execute("ROLLBACK TO SAVEPOINT job")
            conn.execute("RELEASE SAVEPOINT job")
            raise Rejected(_first_line(err)) from err
        conn.execute("RELEASE SAVEPOINT job")
        return inserted

    def commit(self) -> None:
        self._conn.execute("COMMIT")

    def rollback(self) -> None:
        live = self._live
        try:
            if live is not None and not live.closed and not live.broken:
                live.execute("ROLLBACK")
        except psycopg.Error:
            logger.exception("decision log rollback failed")

    def close(self) -> None:
        if self._live is not None:
            self._live.close()
