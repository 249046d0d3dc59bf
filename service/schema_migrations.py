"""Versioned database schema: the alembic migrations packaged in ``service/migrations``.

* :func:`upgrade` (start-up with ``MIGRATE_ON_START``, and ``python -m service.migrate
  upgrade``) brings the database to a revision, by default the newest (head).  It runs
  in one transaction that first takes a lock, so several workers or instances starting
  together apply each migration once, in order, and the others then find the
  database at head: ``pg_advisory_xact_lock`` on PostgreSQL, ``BEGIN IMMEDIATE`` (the
  write lock; the others wait up to the busy timeout) on SQLite.
* A database made by releases before migrations (tables from ``create_all``, no
  ``alembic_version`` table) is checked for the tables and columns of the initial
  revision, stamped at :data:`INITIAL_REVISION` and upgraded; its rows are kept.
* A database at a revision this release does not know (migrated by a newer release)
  raises :class:`SchemaStateError` naming both revisions; nothing is changed.
* :func:`require_head` (start-up without ``MIGRATE_ON_START``) only reads the revision.

The alembic configuration is built here (:func:`alembic_config`); there is no
``alembic.ini``.  Revision scripts live in ``service/migrations/versions``.
"""

from __future__ import annotations

import functools
import os
from collections.abc import Iterator
from contextlib import contextmanager

from alembic import command
from alembic.config import Config
from alembic.runtime.migration import MigrationContext
from alembic.script import ScriptDirectory
from alembic.util import CommandError
from sqlalchemy import Connection, Engine, inspect, text

SCRIPT_LOCATION = os.path.join(os.path.dirname(os.path.abspath(__file__)), "migrations")
INITIAL_REVISION = "0001"
VERSION_TABLE = "alembic_version"
UPGRADE_COMMAND = "python -m service.migrate upgrade"

# Tables and columns as ``create_all`` made them before migrations existed (revision 0001);
# a database without a version table must have all of them before it is stamped.
LEGACY_COLUMNS: dict[str, frozenset[str]] = {
    "assessments": frozenset({
        "id", "sequence", "created_at", "reference", "title", "outcome", "request_json",
        "report_json", "digest", "prev_digest", "engine_version", "catalogue_version"}),
    "chain_head": frozenset({"id", "sequence", "digest"}),
}

_PG_LOCK_KEY = 0x454D46  # "EMF": the same key the table creation of earlier releases used


class SchemaStateError(RuntimeError):
    """The database schema is not one this release can use or migrate as is."""


def alembic_config(connection: Connection | None = None) -> Config:
    """Alembic configuration for the packaged scripts; ``connection`` is what ``env.py`` migrates."""
    config = Config()
    config.set_main_option("script_location", SCRIPT_LOCATION)
    config.attributes["connection"] = connection
    return config


@functools.cache
def script_directory() -> ScriptDirectory:
    """The packaged revision scripts (read once per process)."""
    return ScriptDirectory.from_config(alembic_config())


def head_revision() -> str:
    """Newest revision of this release."""
    head = script_directory().get_current_head()
    assert head is not None, "no revision scripts packaged"
    return head


def current_revisions(conn: Connection) -> tuple[str, ...]:
    """Revisions recorded in the database's version table (empty: none recorded)."""
    return tuple(MigrationContext.configure(conn).get_current_heads())


def describe(conn: Connection) -> str:
    """Where the database is, in words, for messages."""
    revisions = current_revisions(conn)
    if revisions:
        return "revision " + ", ".join(repr(r) for r in revisions)
    if _is_legacy(conn):
        return "no revision (tables created before migrations, no alembic_version table)"
    return "no revision (empty database)"


@contextmanager
def locked(engine: Engine) -> Iterator[Connection]:
    """A connection in a transaction holding the migration lock; committed on success."""
    with engine.connect() as conn, conn.begin():
        if conn.dialect.name == "sqlite":
            # pysqlite does not begin a transaction before DDL by itself; BEGIN IMMEDIATE
            # takes the write lock now, so DDL is transactional and workers queue here.
            conn.exec_driver_sql("BEGIN IMMEDIATE")
        elif conn.dialect.name == "postgresql":
            conn.execute(text("SELECT pg_advisory_xact_lock(:key)"), {"key": _PG_LOCK_KEY})
        yield conn


def upgrade(engine: Engine, revision: str = "head") -> tuple[str, str]:
    """Bring the database to ``revision`` (see module docstring); safe to run concurrently.

    :return: where the database was and is (:func:`describe`), equal when nothing ran.
    :raise SchemaStateError: the database is at an unknown revision, or has some of the
        service's tables but not the schema of the initial revision.
    """
    with locked(engine) as conn:
        _refuse_unknown(conn)
        before = describe(conn)
        if _is_legacy(conn):
            _check_legacy_tables(conn)
            command.stamp(alembic_config(conn), INITIAL_REVISION)
        command.upgrade(alembic_config(conn), revision)
        return before, describe(conn)


def downgrade(engine: Engine, revision: str) -> None:
    """Undo migrations down to ``revision`` (``base``: no tables), under the lock."""
    with locked(engine) as conn:
        _refuse_unknown(conn)
        command.downgrade(alembic_config(conn), revision)


def stamp(engine: Engine, revision: str) -> None:
    """Record ``revision`` in the version table without running migrations."""
    with locked(engine) as conn:
        command.stamp(alembic_config(conn), revision)


def require_head(engine: Engine) -> None:
    """Refuse to run on a database that is not at this release's head (nothing is written).

    :raise SchemaStateError: naming the database's revision and the command to run.
    """
    head = head_revision()
    with engine.connect() as conn:
        if current_revisions(conn) == (head,):
            return
        _refuse_unknown(conn)
        where = describe(conn)
    raise SchemaStateError(
        f"The database schema is at {where}; this release needs revision {head!r} and "
        f"EMF_MIGRATE_ON_START is false. Run `{UPGRADE_COMMAND}` with the same EMF_DATABASE_URL, "
        "then start the service.")


def _refuse_unknown(conn: Connection) -> None:
    for rev in current_revisions(conn):
        try:
            script_directory().get_revision(rev)
        except CommandError:
            raise SchemaStateError(
                f"The database schema is at revision {rev!r}, which this release does not know "
                f"(its newest revision is {head_revision()!r}): a newer release of emf-assess migrated it. "
                "Run that release, or downgrade the database with it (`python -m service.migrate "
                f"downgrade {head_revision()}`), before starting this one. Nothing was changed.") from None


def _is_legacy(conn: Connection) -> bool:
    tables = set(inspect(conn).get_table_names())
    return VERSION_TABLE not in tables and bool(tables & LEGACY_COLUMNS.keys())


def _check_legacy_tables(conn: Connection) -> None:
    inspector = inspect(conn)
    tables = set(inspector.get_table_names())
    missing = []
    for table, columns in LEGACY_COLUMNS.items():
        if table not in tables:
            missing.append(f"table {table}")
            continue
        found = {c["name"] for c in inspector.get_columns(table)}
        missing += [f"column {table}.{name}" for name in sorted(columns - found)]
    if missing:
        raise SchemaStateError(
            "The database has tables of emf-assess but no alembic_version table, and lacks "
            f"{', '.join(missing)} of the initial schema (revision {INITIAL_REVISION!r}), so it cannot "
            "be stamped at that revision. Nothing was changed.")
