"""Fixtures for the service tests: an app on in-memory SQLite and its test client.

Storage tests that must also run on PostgreSQL use the ``db_url`` fixture, which is
parametrized over SQLite (a temporary file) and PostgreSQL
(``postgresql+psycopg://postgres@127.0.0.1:5432/test``, override with
``EMF_TEST_POSTGRES_URL``).  Each test session works in its own PostgreSQL schema
(via ``search_path``), dropped at the end, so parallel runs do not collide.  When
PostgreSQL is unreachable the PostgreSQL cases fail if ``CI`` is set and are
skipped otherwise.
"""

from __future__ import annotations

import os
import uuid
from collections.abc import Iterator
from urllib.parse import quote

import pytest
from flask import Flask
from flask.testing import FlaskClient

from service import create_app

POSTGRES_URL = os.environ.get("EMF_TEST_POSTGRES_URL", "postgresql+psycopg://postgres@127.0.0.1:5432/test")


@pytest.fixture
def app() -> Iterator[Flask]:
    app = create_app({"TESTING": True, "DATABASE_URL": "sqlite://"})
    yield app
    app.extensions["emf_storage"].engine.dispose()


@pytest.fixture
def client(app: Flask) -> FlaskClient:
    return app.test_client()


@pytest.fixture(scope="session")
def postgres_schema_url() -> Iterator[str]:
    """URL of a fresh PostgreSQL schema for this test session (dropped afterwards)."""
    from sqlalchemy import create_engine, text
    from sqlalchemy.exc import OperationalError

    admin = create_engine(POSTGRES_URL, connect_args={"connect_timeout": 3})
    schema = "emf_test_" + uuid.uuid4().hex[:12]
    try:
        with admin.begin() as conn:
            conn.execute(text(f'CREATE SCHEMA "{schema}"'))
    except OperationalError as exc:
        admin.dispose()
        reason = f"PostgreSQL unreachable at {POSTGRES_URL}: {exc.orig}"
        if os.environ.get("CI"):
            pytest.fail(reason + " (CI is set, so this is a failure)")
        pytest.skip(reason + " (set CI=1 to make this a failure)")
    sep = "&" if "?" in POSTGRES_URL else "?"
    yield POSTGRES_URL + sep + "options=" + quote(f"-csearch_path={schema}")
    with admin.begin() as conn:
        conn.execute(text(f'DROP SCHEMA "{schema}" CASCADE'))
    admin.dispose()


@pytest.fixture(params=["sqlite", pytest.param("postgresql", marks=pytest.mark.postgres)])
def db_url(request: pytest.FixtureRequest, tmp_path) -> Iterator[str]:
    """A database URL with no tables: a new SQLite file, or an emptied PostgreSQL schema."""
    if request.param == "sqlite":
        yield "sqlite:///" + str(tmp_path / "test.sqlite3")
        return
    url = request.getfixturevalue("postgres_schema_url")
    drop_service_tables(url)
    yield url
    drop_service_tables(url)


def drop_service_tables(url: str) -> None:
    """Drop the service's tables and alembic's version table (the schema itself stays)."""
    from sqlalchemy import create_engine, text

    from service.schema_migrations import VERSION_TABLE
    from service.storage import Base

    engine = create_engine(url)
    Base.metadata.drop_all(engine)
    with engine.begin() as conn:
        conn.execute(text(f"DROP TABLE IF EXISTS {VERSION_TABLE}"))
    engine.dispose()
