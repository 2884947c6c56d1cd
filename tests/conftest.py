"""Shared fixtures.

``store_url`` / ``store`` run a test once against SQLite (a file in the test's
temporary folder) and once against a real PostgreSQL server given by
``DRAWERFIT_TEST_PG_URL`` (``.ci/postgres.sh`` starts one and prints it).  Each
PostgreSQL test gets a schema of its own, dropped afterwards.  Without the
variable the PostgreSQL half skips with the reason, except under ``CI=true``,
where a missing server is a failure.
"""

from __future__ import annotations

import os
import uuid

import pytest

PG_ENV = "DRAWERFIT_TEST_PG_URL"


def pg_base_url() -> str:
    """The test server's URL; skips (or fails under CI) when there is none."""
    url = os.environ.get(PG_ENV, "").strip()
    if not url:
        if os.environ.get("CI", "").lower() == "true":
            pytest.fail(f"CI=true but {PG_ENV} is not set: the PostgreSQL store tests must run "
                        "in CI (.ci/run starts a server with .ci/postgres.sh)")
        pytest.skip(f"no PostgreSQL server: set {PG_ENV} (e.g. eval \"$(bash .ci/postgres.sh)\")")
    return url


@pytest.fixture
def pg_schema_url():
    """A URL whose connections work in a fresh, private PostgreSQL schema."""
    from sqlalchemy import create_engine
    from sqlalchemy.engine import make_url

    base = pg_base_url()
    schema = f"t_{uuid.uuid4().hex[:16]}"
    engine = create_engine(base)
    with engine.begin() as conn:
        conn.exec_driver_sql(f'CREATE SCHEMA "{schema}"')
    url = make_url(base).update_query_dict({"options": f"-csearch_path={schema}"})
    try:
        yield url.render_as_string(hide_password=False)
    finally:
        with engine.begin() as conn:
            conn.exec_driver_sql(f'DROP SCHEMA IF EXISTS "{schema}" CASCADE')
        engine.dispose()


@pytest.fixture(params=["sqlite", pytest.param("postgresql", marks=pytest.mark.postgres)])
def store_url(request, tmp_path):
    """Where a store lives: a SQLite file, or a private schema on the PostgreSQL server."""
    if request.param == "sqlite":
        yield str(tmp_path / "stock.sqlite")
    else:
        yield request.getfixturevalue("pg_schema_url")


@pytest.fixture
def store(store_url):
    """A new, empty, migrated store on each database."""
    from inventory.store import open_store

    s = open_store(store_url)
    try:
        yield s
    finally:
        s.close()
