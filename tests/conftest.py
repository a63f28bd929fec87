"""Suite-wide fixtures: PostgreSQL databases when a test server is available.

``scripts/test`` starts a throwaway server (``scripts/postgres``) and exports its URL as
``UPSHOT_TEST_POSTGRES_URL``; CI also sets ``UPSHOT_REQUIRE_POSTGRES=1``, which turns a
PostgreSQL test that would be skipped into a failure.
"""

from __future__ import annotations

import os
from collections.abc import Iterator

import pytest
from postgres_db import create_database, drop_database

POSTGRES_URL = "UPSHOT_TEST_POSTGRES_URL"
REQUIRE_POSTGRES = "UPSHOT_REQUIRE_POSTGRES"


@pytest.hookimpl(wrapper=True)
def pytest_runtest_makereport(item: pytest.Item, call: pytest.CallInfo[None]) -> object:
    report = yield
    if (
        os.environ.get(REQUIRE_POSTGRES) == "1"
        and getattr(report, "skipped", False)
        and "postgres" in item.nodeid
    ):
        report.outcome = "failed"  # type: ignore[attr-defined]
        report.longrepr = f"{item.nodeid} was skipped although {REQUIRE_POSTGRES}=1"  # type: ignore[attr-defined]
    return report


@pytest.fixture(scope="session")
def postgres_admin_url() -> str:
    """URL of a PostgreSQL server whose user may create databases."""
    url = os.environ.get(POSTGRES_URL)
    if not url:
        if os.environ.get(REQUIRE_POSTGRES) == "1":
            pytest.fail(
                f"{REQUIRE_POSTGRES}=1 but {POSTGRES_URL} is unset (scripts/postgres start)"
            )
        pytest.skip(f"no PostgreSQL: set {POSTGRES_URL} (scripts/postgres start)")
    return url


@pytest.fixture(scope="module")
def postgres_module_url(postgres_admin_url: str) -> Iterator[str]:
    """A fresh database for one test module, dropped afterwards."""
    url = create_database(postgres_admin_url)
    yield url
    drop_database(postgres_admin_url, url)


@pytest.fixture
def postgres_empty_url(postgres_admin_url: str) -> Iterator[str]:
    """A fresh database for one test."""
    url = create_database(postgres_admin_url)
    yield url
    drop_database(postgres_admin_url, url)
