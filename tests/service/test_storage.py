"""Storage against SQLite and PostgreSQL: round trip, digest chain, immutability, concurrency.

The digest recipe is checked against an independent computation with hashlib
(FIPS 180-4 SHA-256) of the documented byte string, not against record_digest itself.
"""

from __future__ import annotations

import hashlib
import threading
import uuid
from datetime import datetime, timedelta, timezone

import pytest
from sqlalchemy import select
from sqlalchemy.orm import sessionmaker

from service import storage
from service.storage import GENESIS_DIGEST, AssessmentRecord


def report_for(n: int, *, reference: str = "REF-A", outcome: str = "pass") -> dict:
    return {"title": f"Assessment {n}", "reference": reference, "outcome": outcome,
            "engine_version": "0.1.0", "catalogue_version": "2026.12.1", "value_ut": float(n)}


@pytest.fixture
def engine(db_url):
    eng = storage.make_engine(db_url)
    storage.create_schema(eng)
    yield eng
    eng.dispose()


@pytest.fixture
def make_session(engine):
    return sessionmaker(engine, expire_on_commit=False)


def insert(make_session, n: int, **kwargs) -> AssessmentRecord:
    with make_session() as session, session.begin():
        return storage.insert_assessment(session, storage.canonical_json({"n": n}), report_for(n, **kwargs))


def test_round_trip_keeps_everything(make_session):
    record = insert(make_session, 1)
    with make_session() as session:
        got = storage.get_assessment(session, record.id)
    assert got is not None
    assert got.created_at.tzinfo is not None and got.created_at.utcoffset() == timedelta(0)
    assert abs((datetime.now(timezone.utc) - got.created_at).total_seconds()) < 3600
    assert got.request_json == '{"n":1}'
    body = got.report()
    assert body["id"] == str(record.id)
    assert body["created_at"] == storage.rfc3339(got.created_at)
    assert body["value_ut"] == 1.0 and body["digest"] == got.digest
    assert (got.sequence, got.prev_digest) == (1, GENESIS_DIGEST)


def test_digest_matches_documented_recipe(make_session):
    first = insert(make_session, 1)
    second = insert(make_session, 2)
    for rec, prev in ((first, GENESIS_DIGEST), (second, first.digest)):
        # DEVELOPERS.md: sha256(utf8(request_json + "\n" + report_json + "\n" + prev_digest))
        expected = hashlib.sha256(f"{rec.request_json}\n{rec.report_json}\n{prev}".encode()).hexdigest()
        assert rec.digest == expected
        assert rec.prev_digest == prev
    with make_session() as session:
        assert storage.chain_head(session) == (2, second.digest)


def test_unknown_id_is_none(make_session):
    with make_session() as session:
        assert storage.get_assessment(session, uuid.uuid4()) is None


def test_records_are_immutable_through_the_orm(make_session):
    record = insert(make_session, 1)
    with make_session() as session:
        got = storage.get_assessment(session, record.id)
        got.title = "changed"
        with pytest.raises(PermissionError):
            session.commit()
    with make_session() as session:
        got = storage.get_assessment(session, record.id)
        session.delete(got)
        with pytest.raises(PermissionError):
            session.commit()
    with make_session() as session:
        assert storage.get_assessment(session, record.id).title == "Assessment 1"


def test_outcome_is_constrained(make_session):
    from sqlalchemy.exc import IntegrityError

    with pytest.raises(IntegrityError):
        insert(make_session, 1, outcome="nope")
    with make_session() as session:
        assert storage.count_assessments(session) == 0


def test_list_filters_and_cursor_pages(make_session):
    for n in range(7):
        insert(make_session, n, reference="REF-A" if n % 2 else "REF-B", outcome="fail" if n == 3 else "pass")
    with make_session() as session:
        page = storage.list_assessments(session, limit=3)
        assert [r.title for r in page.records] == ["Assessment 6", "Assessment 5", "Assessment 4"]
        seen = [r.sequence for r in page.records]
        while page.next_cursor:
            page = storage.list_assessments(session, limit=3, before_sequence=storage.decode_cursor(page.next_cursor))
            seen += [r.sequence for r in page.records]
        assert seen == [7, 6, 5, 4, 3, 2, 1]
        assert [r.title for r in storage.list_assessments(session, limit=10, reference="REF-A").records] == \
            ["Assessment 5", "Assessment 3", "Assessment 1"]
        assert [r.title for r in storage.list_assessments(session, limit=10, outcome="fail").records] == \
            ["Assessment 3"]
        middle = storage.get_assessment(session, list(storage.iter_chain(session))[3].id)
        after = storage.list_assessments(session, limit=10, created_after=middle.created_at).records
        before = storage.list_assessments(session, limit=10, created_before=middle.created_at).records
        assert middle.id not in {r.id for r in after + before}
        assert all(r.created_at > middle.created_at for r in after)
        assert all(r.created_at < middle.created_at for r in before)


@pytest.mark.parametrize("cursor", ["", "not-base64!", "eyJ4IjoxfQ", storage.encode_cursor(1)[:-2] + "$$"])
def test_bad_cursor_rejected(cursor):
    with pytest.raises(ValueError):
        storage.decode_cursor(cursor)


def test_cursor_round_trip():
    assert storage.decode_cursor(storage.encode_cursor(42)) == 42


def test_concurrent_inserts_keep_chain_linear(make_session):
    threads, per_thread = 4, 5
    errors: list[BaseException] = []
    start = threading.Barrier(threads)

    def work(t: int) -> None:
        try:
            start.wait()
            for k in range(per_thread):
                insert(make_session, t * 100 + k)
        except BaseException as exc:  # reported below
            errors.append(exc)

    pool = [threading.Thread(target=work, args=(t,)) for t in range(threads)]
    for th in pool:
        th.start()
    for th in pool:
        th.join()
    assert not errors, errors
    with make_session() as session:
        chain = list(storage.iter_chain(session, batch_size=7))
        assert [r.sequence for r in chain] == list(range(1, threads * per_thread + 1))
        prev = GENESIS_DIGEST
        for rec in chain:
            assert rec.prev_digest == prev
            assert rec.digest == storage.record_digest(rec.request_json, rec.report_json, prev)
            prev = rec.digest
        assert storage.chain_head(session) == (len(chain), prev)
        assert len({r.id for r in chain}) == len(chain)


def test_create_schema_is_idempotent(engine, make_session):
    insert(make_session, 1)
    storage.create_schema(engine)
    with make_session() as session:
        assert storage.count_assessments(session) == 1
        assert session.scalars(select(storage.ChainHead)).one().sequence == 1


def test_sqlite_pragmas(tmp_path):
    eng = storage.make_engine("sqlite:///" + str(tmp_path / "p.sqlite3"))
    with eng.connect() as conn:
        assert conn.exec_driver_sql("PRAGMA journal_mode").scalar() == "wal"
        assert conn.exec_driver_sql("PRAGMA foreign_keys").scalar() == 1
        assert conn.exec_driver_sql("PRAGMA busy_timeout").scalar() >= 1000
    eng.dispose()


def test_naive_datetime_refused(make_session):
    rec = AssessmentRecord(id=uuid.uuid4(), sequence=99, created_at=datetime(2026, 1, 1), reference="r",
                           title="t", outcome="pass", request_json="{}", report_json="{}", digest="d" * 64,
                           prev_digest=GENESIS_DIGEST, engine_version="x", catalogue_version="y")
    from sqlalchemy.exc import StatementError

    with make_session() as session:
        session.add(rec)
        with pytest.raises(StatementError, match="timezone-aware"):
            session.commit()


def test_served_json_parses_to_report(make_session):
    import json

    record = insert(make_session, 3)
    assert json.loads(record.served_json()) == record.report()
    assert list(json.loads(record.served_json()))[-1] == "digest"


def test_whole_api_on_each_database(db_url):
    # The HTTP round trip on SQLite and PostgreSQL: UUID, timestamptz and text columns behave alike.
    from service import create_app
    from tests.service.test_api import small_body

    app = create_app({"TESTING": True, "DATABASE_URL": db_url})
    client = app.test_client()
    created = client.post("/v1/assessments", json=small_body())
    assert created.status_code == 201
    assert client.get(created.headers["Location"]).get_json() == created.get_json()
    listed = client.get("/v1/assessments?reference=T-1").get_json()["data"]
    assert [d["id"] for d in listed] == [created.get_json()["id"]]
    after = client.get("/v1/assessments", query_string={"created_after": created.get_json()["created_at"]})
    assert after.get_json()["data"] == []
    assert client.get("/healthz").status_code == 200
    storage.storage_of(app).engine.dispose()


def test_bare_postgresql_url_uses_psycopg():
    assert storage.normalise_url("postgresql://postgres@127.0.0.1:5432/test") == \
        "postgresql+psycopg://postgres@127.0.0.1:5432/test"
