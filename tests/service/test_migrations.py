"""Schema migrations (alembic) on SQLite and PostgreSQL: fresh, legacy, downgrade, concurrency, refusals.

The schema an upgrade produces is compared with the ORM models by alembic's own
autogenerate comparison (``alembic.autogenerate.compare_metadata``, documented as
returning the list of differences between a database and a ``MetaData``), which
reflects the database independently of our revision script.  Digests are checked by
the service's chain walk and re-derivation, which tests/service/test_verify.py ties to
hashlib's SHA-256.
"""

from __future__ import annotations

import fnmatch
import logging
import os
import subprocess
import sys
import threading
import tomllib
from pathlib import Path

import pytest
from alembic.autogenerate import compare_metadata
from alembic.runtime.migration import MigrationContext
from sqlalchemy import inspect, text

from service import create_app, schema_migrations, storage
from service.schema_migrations import INITIAL_REVISION, SchemaStateError
from service.storage import GENESIS_DIGEST, Base
from tests.service.test_api import small_body

ROOT = Path(__file__).resolve().parents[2]
SERVICE_TABLES = {"assessments", "chain_head", "batches", "batch_items", "api_keys", "idempotency_keys"}
LEGACY_TABLES = {"assessments", "chain_head"}  # what create_all made before migrations (revision 0001)
HEAD = schema_migrations.head_revision()


def start(db_url: str, **settings):
    return create_app({"TESTING": True, "DATABASE_URL": db_url, "WARM_UP_ENGINE": False, **settings})


def stop(app) -> None:
    storage.storage_of(app).engine.dispose()


@pytest.fixture
def engine(db_url):
    eng = storage.make_engine(db_url)
    yield eng
    eng.dispose()


def differences(engine) -> list:
    with engine.connect() as conn:
        return compare_metadata(MigrationContext.configure(conn, opts={"compare_type": True}), Base.metadata)


def tables(engine) -> set[str]:
    with engine.connect() as conn:
        return set(inspect(conn).get_table_names())


def revisions(engine) -> tuple[str, ...]:
    with engine.connect() as conn:
        return schema_migrations.current_revisions(conn)


def legacy_schema(engine) -> None:
    """What ``create_schema`` did before migrations: the two tables of that time and the chain-head row.

    Revision 0001 made exactly those tables (revision 0003 later added ``assessments.tenant``),
    so the database is built from revision 0001's DDL and its version table dropped.
    """
    schema_migrations.upgrade(engine, INITIAL_REVISION)
    with engine.begin() as conn:
        conn.execute(text(f"DROP TABLE {schema_migrations.VERSION_TABLE}"))
        assert tuple(conn.execute(storage.ChainHead.__table__.select()).one()) == (1, 0, GENESIS_DIGEST)


def insert_old_record(engine) -> storage.AssessmentRecord:
    """The demo-like small record as a release without organisations stored it, in a database of that time.

    Built by today's ``insert_assessment`` (no tenant: the digest has the original form) on a
    scratch database, then its columns other than ``tenant`` are written into ``engine``'s
    empty chain, whatever revision its tables are at.
    """
    from service.report import build_report
    from service.schemas import load_assessment_request

    report = build_report(load_assessment_request(small_body(), max_points=20_001, max_conductors=64))
    scratch = storage.make_engine("sqlite://")
    storage.create_schema(scratch)
    with storage.sessionmaker(scratch, expire_on_commit=False)() as session, session.begin():
        record = storage.insert_assessment(session, storage.canonical_json(report["input"]), report)
    scratch.dispose()
    table = storage.AssessmentRecord.__table__
    values = {c.name: getattr(record, c.name) for c in table.columns if c.name != "tenant"}
    with engine.begin() as conn:
        conn.execute(table.insert().values(**values))
        conn.execute(storage.ChainHead.__table__.update().values(sequence=record.sequence, digest=record.digest))
    return record


def test_upgrade_of_empty_database_equals_the_models(engine):
    # The comparison can fail: before the upgrade it reports both tables missing.
    assert {d[1].name for d in differences(engine) if d[0] == "add_table"} == SERVICE_TABLES
    storage.create_schema(engine)
    assert differences(engine) == []
    assert revisions(engine) == (schema_migrations.head_revision(),)
    with engine.connect() as conn:
        assert conn.execute(text("SELECT id, sequence, digest FROM chain_head")).all() == [(1, 0, GENESIS_DIGEST)]


def test_legacy_database_is_stamped_upgraded_and_keeps_its_chain(engine, db_url):
    legacy_schema(engine)
    old = insert_old_record(engine)
    assert tables(engine) == LEGACY_TABLES  # no version table: the pre-migration layout

    app = start(db_url)
    client = app.test_client()
    assert revisions(engine) == (HEAD,) and differences(engine) == []
    stored = client.get(f"/v1/assessments/{old.id}")
    assert stored.status_code == 200 and stored.get_json()["digest"] == old.digest
    assert client.post(f"/v1/assessments/{old.id}/verify").get_json()["verdict"] == "match"
    assert client.post("/v1/assessments", json=small_body(title="After the upgrade")).status_code == 201
    chain = client.get("/v1/audit/verify-chain").get_json()
    assert chain["ok"] is True and chain["records_checked"] == 2 and chain["breaks_found"] == 0
    stop(app)


def test_partial_legacy_database_is_refused_untouched(engine, db_url):
    with engine.begin() as conn:
        storage.ChainHead.__table__.create(conn)
    with pytest.raises(SchemaStateError, match="lacks table assessments"):
        start(db_url)
    assert tables(engine) == {"chain_head"}


def test_downgrade_to_base_drops_the_tables_and_upgrade_restores_them(engine):
    storage.create_schema(engine)
    schema_migrations.downgrade(engine, "base")
    assert tables(engine) - {schema_migrations.VERSION_TABLE} == set()
    assert revisions(engine) == ()
    storage.create_schema(engine)
    assert differences(engine) == [] and revisions(engine) == (HEAD,)


def test_concurrent_start_up_migrates_once(db_url, engine, caplog):
    # Two app instances starting together on one empty database (gunicorn workers, replicas):
    # one migrates, the other waits for the lock and finds the database at head.
    caplog.set_level(logging.INFO, logger="alembic.runtime.migration")
    barrier = threading.Barrier(2)
    apps, errors = [], []

    def boot() -> None:
        try:
            barrier.wait()
            apps.append(start(db_url))
        except BaseException as exc:  # reported below
            errors.append(exc)

    threads = [threading.Thread(target=boot) for _ in range(2)]
    for t in threads:
        t.start()
    for t in threads:
        t.join(timeout=60)  # without the lock the two migrations deadlock or collide
    assert not any(t.is_alive() for t in threads) and not errors, errors
    ran = [r.getMessage() for r in caplog.records if r.getMessage().startswith("Running upgrade")]
    # one instance ran every revision once; the other ran none
    assert len(ran) == len(list(schema_migrations.script_directory().walk_revisions())), ran
    assert revisions(engine) == (HEAD,) and differences(engine) == []
    with engine.connect() as conn:
        assert conn.execute(text("SELECT count(*) FROM chain_head")).scalar() == 1
    for app in apps:
        assert app.test_client().get("/healthz").status_code == 200
        stop(app)


def test_without_migrate_on_start_an_empty_database_is_refused(engine, db_url):
    with pytest.raises(SchemaStateError, match=r"no revision \(empty database\).*python -m service\.migrate upgrade"):
        start(db_url, MIGRATE_ON_START=False)
    assert tables(engine) == set()


def test_without_migrate_on_start_a_legacy_database_is_refused(engine, db_url):
    legacy_schema(engine)
    with pytest.raises(SchemaStateError, match=rf"tables created before migrations.*needs revision '{HEAD}'"):
        start(db_url, MIGRATE_ON_START=False)
    assert tables(engine) == LEGACY_TABLES


def test_without_migrate_on_start_a_migrated_database_starts(engine, db_url):
    storage.create_schema(engine)
    app = start(db_url, EMF_MIGRATE_ON_START=False)
    assert app.test_client().get("/healthz").status_code == 200
    stop(app)


@pytest.mark.parametrize("migrate_on_start", [True, False])
def test_unknown_newer_revision_fails_start_up_and_changes_nothing(engine, db_url, migrate_on_start):
    storage.create_schema(engine)
    with engine.begin() as conn:
        conn.execute(text("UPDATE alembic_version SET version_num = '0042'"))
    with pytest.raises(SchemaStateError, match=rf"revision '0042'.*does not know.*newest revision is '{HEAD}'"):
        start(db_url, MIGRATE_ON_START=migrate_on_start)
    assert revisions(engine) == ("0042",) and tables(engine) >= SERVICE_TABLES


def test_migrate_command_on_a_sqlite_file(tmp_path):
    env = {k: v for k, v in os.environ.items() if not k.startswith("EMF_")}
    env["EMF_DATABASE_URL"] = "sqlite:///" + str(tmp_path / "cli.sqlite3")

    def run(*args: str) -> subprocess.CompletedProcess:
        return subprocess.run([sys.executable, "-m", "service.migrate", *args], cwd=tmp_path, env=env,
                              capture_output=True, text=True, timeout=60)

    before = run("current")
    assert before.returncode == 0, before.stderr
    assert "no revision (empty database)" in before.stdout and "python -m service.migrate upgrade" in before.stdout
    up = run("upgrade")
    assert up.returncode == 0, up.stderr
    assert "Running upgrade  -> 0001" in up.stderr
    assert up.stdout.strip() == f"Database at revision '{HEAD}' (head)."  # what `current` prints at head
    bad = run("upgrade", "0042")
    assert bad.returncode == 1 and "0042" in bad.stderr
    app = start(env["EMF_DATABASE_URL"], MIGRATE_ON_START=False)
    assert app.test_client().get("/healthz").status_code == 200
    stop(app)


def test_revision_scripts_are_package_data():
    # setuptools: package-data globs are relative to the package directory.
    patterns = tomllib.loads((ROOT / "pyproject.toml").read_text())["tool"]["setuptools"]["package-data"]["service"]
    package = ROOT / "service"
    files = [p.relative_to(package).as_posix() for p in (package / "migrations").rglob("*")
             if p.is_file() and "__pycache__" not in p.parts]
    assert {"migrations/env.py", "migrations/script.py.mako", "migrations/versions/0001_initial_schema.py"} <= set(files)
    assert [f for f in files if not any(fnmatch.fnmatch(f, pat) for pat in patterns)] == []
    assert Path(schema_migrations.SCRIPT_LOCATION) == package / "migrations"


@pytest.mark.parametrize("settings, message", [
    ({"MIGRATE_ON_START": "no"}, "MIGRATE_ON_START must be true or false"),
    ({"CREATE_TABLES": False}, "CREATE_TABLES was replaced by MIGRATE_ON_START"),
])
def test_bad_migration_settings_fail_fast(settings, message):
    with pytest.raises(ValueError, match=message):
        create_app({"DATABASE_URL": "sqlite://", "WARM_UP_ENGINE": False, **settings})


def test_batch_tables_upgrade_from_0001_with_records_present(engine, db_url):
    schema_migrations.upgrade(engine, "0001")
    assert tables(engine) == LEGACY_TABLES | {schema_migrations.VERSION_TABLE}
    old = insert_old_record(engine)
    schema_migrations.upgrade(engine)
    assert revisions(engine) == (HEAD,) and differences(engine) == [] and tables(engine) >= SERVICE_TABLES
    schema_migrations.downgrade(engine, "0001")
    assert tables(engine) == LEGACY_TABLES | {schema_migrations.VERSION_TABLE}
    schema_migrations.upgrade(engine)
    app = start(db_url)
    client = app.test_client()
    assert client.post(f"/v1/assessments/{old.id}/verify").get_json()["verdict"] == "match"
    stop(app)
