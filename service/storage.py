"""Storage of assessments: typed SQLAlchemy 2.x models and query functions.

* :func:`init_app` builds one engine and ``sessionmaker`` per application (so per
  gunicorn worker) from ``DATABASE_URL``; the default is a SQLite file in the
  Flask instance folder.  SQLite connections get WAL, a busy timeout and foreign
  keys via a ``connect`` event.  The schema is versioned: :func:`create_schema` runs
  the alembic migrations of ``service/migrations`` (:mod:`service.schema_migrations`);
  a change to the models below needs a new revision there (DEVELOPERS.md).
* The request owns the session: :func:`get_session` gives the one session of the
  current request (closed on teardown); views wrap their work in
  ``with session.begin():``.  Functions here take the session first and never commit.
* Records are immutable through the API (no update/delete functions; the ORM
  refuses flushes that would change or delete a stored record).

Record chain and digest (also in DEVELOPERS.md, "Storage and digests"): each
record stores ``digest = record_digest(request_json, report_json, prev_digest)``
where ``prev_digest`` is the digest of the record with the previous ``sequence``
(:data:`GENESIS_DIGEST` for the first).  The chain is global.  The head of the chain
(one row of ``chain_head``) is claimed with an ``UPDATE`` as the first statement of
the insert transaction, which takes a row lock on PostgreSQL and the write lock
on SQLite, so concurrent inserts queue and the chain stays linear.

Organisations (tenants): with access control on (:mod:`service.access`), each
assessment and batch row carries the ``tenant`` of the key that submitted it, and the
request's session is *scoped*: :func:`get_session` puts the caller's tenant in
``session.info`` and a ``do_orm_execute`` hook adds ``tenant = :tenant`` to every ORM
query of :class:`TenantOwned` rows (SQLAlchemy's ``with_loader_criteria``), so no view
can read another organisation's rows by forgetting a filter.  The chain walk is global
by design and opts out with ``execution_options(all_tenants=True)``.  A record's tenant
is part of its digest (:func:`record_digest`), so moving a record to another
organisation breaks the chain.
"""

from __future__ import annotations

import base64
import hashlib
import json
import os
import sqlite3
import time
import uuid
from collections.abc import Iterator, Mapping
from dataclasses import dataclass
from datetime import datetime, timezone
from typing import Any

from flask import Flask, current_app, g
from sqlalchemy import (
    BigInteger,
    CheckConstraint,
    DateTime,
    Engine,
    Float,
    ForeignKey,
    Integer,
    String,
    Text,
    TypeDecorator,
    Uuid,
    create_engine,
    event,
    func,
    select,
    text,
    update,
)
from sqlalchemy.orm import (
    DeclarativeBase,
    Mapped,
    ORMExecuteState,
    Session,
    mapped_column,
    sessionmaker,
    with_loader_criteria,
)
from sqlalchemy.pool import StaticPool

from .json_text import dumps

GENESIS_DIGEST = "0" * 64
"""``prev_digest`` of the first record in the chain."""

EXTENSION_KEY = "emf_storage"
SQLITE_FILENAME = "emf-assess.sqlite3"
_WAL_ATTEMPTS = 20  # about 4 s of waiting in all


class UTCDateTime(TypeDecorator[datetime]):
    """Timezone-aware UTC datetimes on every backend (SQLite stores them naive)."""

    impl = DateTime(timezone=True)
    cache_ok = True

    def process_bind_param(self, value: datetime | None, dialect: Any) -> datetime | None:
        if value is None:
            return None
        if value.tzinfo is None:
            raise ValueError("created_at must be timezone-aware")
        value = value.astimezone(timezone.utc)
        return value.replace(tzinfo=None) if dialect.name == "sqlite" else value

    def process_result_value(self, value: datetime | None, dialect: Any) -> datetime | None:
        if value is None:
            return None
        if value.tzinfo is None:
            return value.replace(tzinfo=timezone.utc)
        return value.astimezone(timezone.utc)


class Base(DeclarativeBase):
    pass


TENANT_LENGTH = 100
"""Longest organisation (tenant) name."""

ALL_TENANTS = "all_tenants"
"""Execution option that lifts the tenant scope of a query (the global chain walk)."""


class TenantOwned:
    """Rows that belong to one organisation: ``tenant`` (None when stored with access control off)."""

    tenant: Mapped[str | None] = mapped_column(String(TENANT_LENGTH), nullable=True, index=True)


class AssessmentRecord(TenantOwned, Base):
    """One stored assessment: the canonical request, the report and the chain link."""

    __tablename__ = "assessments"
    __table_args__ = (CheckConstraint("outcome IN ('pass', 'fail')", name="ck_assessments_outcome"),)

    id: Mapped[uuid.UUID] = mapped_column(Uuid, primary_key=True)
    sequence: Mapped[int] = mapped_column(BigInteger().with_variant(Integer, "sqlite"), unique=True)
    created_at: Mapped[datetime] = mapped_column(UTCDateTime, index=True)
    reference: Mapped[str] = mapped_column(String(200), index=True)
    title: Mapped[str] = mapped_column(String(200))
    outcome: Mapped[str] = mapped_column(String(4), index=True)
    request_json: Mapped[str] = mapped_column(Text)
    report_json: Mapped[str] = mapped_column(Text)
    digest: Mapped[str] = mapped_column(String(64), unique=True)
    prev_digest: Mapped[str] = mapped_column(String(64))
    engine_version: Mapped[str] = mapped_column(String(32))
    catalogue_version: Mapped[str] = mapped_column(String(32))

    def report(self) -> dict[str, Any]:
        """The stored report, parsed, with ``digest`` appended (as served by the API)."""
        body = json.loads(self.report_json)
        body["digest"] = self.digest
        return body

    def served_json(self) -> str:
        """JSON text of :meth:`report` built without re-parsing: the stored text plus ``digest``.

        ``report_json`` is a compact JSON object, so the digest member goes before its
        closing brace; the result parses to exactly :meth:`report`.
        """
        assert self.report_json.endswith("}")
        return "".join([self.report_json[:-1], ',"digest":', json.dumps(self.digest), "}"])


class ChainHead(Base):
    """Single row (id = 1) holding the sequence number and digest of the newest record."""

    __tablename__ = "chain_head"
    __table_args__ = (CheckConstraint("id = 1", name="ck_chain_head_single_row"),)

    id: Mapped[int] = mapped_column(Integer, primary_key=True)
    sequence: Mapped[int] = mapped_column(BigInteger().with_variant(Integer, "sqlite"))
    digest: Mapped[str] = mapped_column(String(64))


class BatchRecord(TenantOwned, Base):
    """One submitted batch."""

    __tablename__ = "batches"

    id: Mapped[uuid.UUID] = mapped_column(Uuid, primary_key=True)
    created_at: Mapped[datetime] = mapped_column(UTCDateTime, index=True)
    title: Mapped[str] = mapped_column(String(200))
    item_count: Mapped[int] = mapped_column(Integer)


class BatchItem(Base):
    """One scenario of a batch and what became of it."""

    __tablename__ = "batch_items"
    __table_args__ = (CheckConstraint("status IN ('pending', 'running', 'done', 'error')",
                                      name="ck_batch_items_status"),)

    batch_id: Mapped[uuid.UUID] = mapped_column(Uuid, ForeignKey("batches.id"), primary_key=True)
    position: Mapped[int] = mapped_column(Integer, primary_key=True)
    name: Mapped[str] = mapped_column(String(200))
    request_json: Mapped[str] = mapped_column(Text)
    status: Mapped[str] = mapped_column(String(8), index=True)
    claim: Mapped[str | None] = mapped_column(String(32), nullable=True)
    claimed_at: Mapped[datetime | None] = mapped_column(UTCDateTime, nullable=True)
    finished_at: Mapped[datetime | None] = mapped_column(UTCDateTime, nullable=True)
    assessment_id: Mapped[uuid.UUID | None] = mapped_column(Uuid, ForeignKey("assessments.id"), nullable=True)
    verdict: Mapped[str | None] = mapped_column(String(4), nullable=True)
    max_e_kv_m: Mapped[float | None] = mapped_column(Float, nullable=True)
    max_b_ut: Mapped[float | None] = mapped_column(Float, nullable=True)
    worst_exposure_index: Mapped[float | None] = mapped_column(Float, nullable=True)
    problem_json: Mapped[str | None] = mapped_column(Text, nullable=True)

    def problem(self) -> dict[str, Any] | None:
        return json.loads(self.problem_json) if self.problem_json else None


class ApiKey(Base):
    """An API key: its public id, organisation, role and a salted scrypt hash of its secret (:mod:`service.access`)."""

    __tablename__ = "api_keys"
    __table_args__ = (CheckConstraint("role IN ('submit', 'read')", name="ck_api_keys_role"),)

    key_id: Mapped[str] = mapped_column(String(32), primary_key=True)
    tenant: Mapped[str] = mapped_column(String(TENANT_LENGTH), index=True)
    role: Mapped[str] = mapped_column(String(8))
    label: Mapped[str] = mapped_column(String(200))
    salt: Mapped[str] = mapped_column(String(64))
    secret_hash: Mapped[str] = mapped_column(String(128))
    created_at: Mapped[datetime] = mapped_column(UTCDateTime)
    revoked_at: Mapped[datetime | None] = mapped_column(UTCDateTime, nullable=True)


class IdempotencyKey(Base):
    """An ``Idempotency-Key`` used on ``POST /v1/assessments``: the body it came with and the record it made.

    Written in the same transaction as the record, so a key exists exactly when its
    assessment does.  ``tenant`` is ``""`` with access control off.
    """

    __tablename__ = "idempotency_keys"

    tenant: Mapped[str] = mapped_column(String(TENANT_LENGTH), primary_key=True)
    key: Mapped[str] = mapped_column(String(255), primary_key=True)
    body_sha256: Mapped[str] = mapped_column(String(64))
    assessment_id: Mapped[uuid.UUID] = mapped_column(Uuid, ForeignKey("assessments.id"))
    created_at: Mapped[datetime] = mapped_column(UTCDateTime)


@event.listens_for(Session, "do_orm_execute")
def _scope_to_tenant(state: ORMExecuteState) -> None:
    """Add ``tenant = :tenant`` to every ORM select of :class:`TenantOwned` rows in a scoped session."""
    if "tenant" not in state.session.info or not state.is_select or state.execution_options.get(ALL_TENANTS):
        return
    tenant = state.session.info["tenant"]
    state.statement = state.statement.options(with_loader_criteria(
        TenantOwned, lambda cls: cls.tenant == tenant, include_aliases=True, track_closure_variables=False))


@event.listens_for(AssessmentRecord, "before_update")
def _refuse_update(mapper: Any, connection: Any, target: AssessmentRecord) -> None:
    raise PermissionError("Stored assessments are immutable.")


@event.listens_for(AssessmentRecord, "before_delete")
def _refuse_delete(mapper: Any, connection: Any, target: AssessmentRecord) -> None:
    raise PermissionError("Stored assessments are immutable.")


# --------------------------------------------------------------------------- digests


def canonical_json(obj: Any) -> str:
    """Canonical JSON text: sorted keys, no insignificant whitespace, UTF-8 characters, no NaN.

    >>> canonical_json({"b": 1.0, "a": [True, None, "µT"]})
    '{"a":[true,null,"µT"],"b":1.0}'
    """
    return json.dumps(obj, sort_keys=True, separators=(",", ":"), ensure_ascii=False, allow_nan=False)


def report_to_json(report: Mapping[str, Any]) -> str:
    """Stored form of a report: compact JSON, key order kept, UTF-8 characters unescaped.

    Written by :func:`service.json_text.dumps` (the standard library's ``json.dumps``
    text, byte for byte, with point tables written column by column).
    """
    return dumps(report).decode("utf-8")


def record_digest(canonical_request: str, report_json: str | bytes, prev_digest: str,
                  tenant: str | None = None) -> str:
    """SHA-256 digest of one record, chained to its predecessor.

    ``sha256(utf8(canonical_request + "\\n" + report_json + "\\n" + prev_digest))`` as
    64 lowercase hex digits; a record stored for an organisation appends
    ``"\\n" + tenant`` (records without a tenant, including every record stored before
    organisations existed, keep the original form).  ``canonical_request`` and
    ``report_json`` are the exact stored column texts (``request_json``,
    ``report_json``); none of the parts contains a raw newline, so the separators are
    unambiguous.

    >>> record_digest("{}", "{}", GENESIS_DIGEST)[:16]
    'fc32dd59379f595f'
    """
    h = hashlib.sha256(canonical_request.encode("utf-8"))
    h.update(b"\n")
    h.update(report_json if isinstance(report_json, bytes) else report_json.encode("utf-8"))
    h.update(b"\n" + prev_digest.encode("ascii"))
    if tenant is not None:
        h.update(b"\n" + tenant.encode("utf-8"))
    return h.hexdigest()


def rfc3339(moment: datetime) -> str:
    """UTC timestamp as RFC 3339 with microseconds and ``Z``."""
    return moment.astimezone(timezone.utc).isoformat(timespec="microseconds").replace("+00:00", "Z")


# --------------------------------------------------------------------------- queries


def insert_assessment(session: Session, canonical_request: str, report: Mapping[str, Any], *,
                      tenant: str | None = None) -> AssessmentRecord:
    """Append one assessment to the chain (caller commits).

    Parameters
    ----------
    session : Session
        Inside the caller's transaction; nothing else may have run in it, so that the
        chain-head claim is its first statement.
    canonical_request : str
        The normalised request as :func:`canonical_json` text.
    report : mapping
        The report body without ``id``/``created_at``; must hold ``title``,
        ``reference``, ``outcome``, ``engine_version`` and ``catalogue_version``.
        The stored report is ``{"id", "created_at", **report}``.
    tenant : str, optional
        The organisation the record belongs to (None with access control off).

    Returns
    -------
    AssessmentRecord
        The new record, flushed.

    The report is encoded before the chain head is claimed, so concurrent inserts wait
    only for the digest and the row, not for the encoding.
    """
    encoded = dumps(report)  # '{...}' without id and created_at
    session.execute(update(ChainHead).where(ChainHead.id == 1).values(sequence=ChainHead.sequence + 1))
    sequence, prev_digest = session.execute(
        select(ChainHead.sequence, ChainHead.digest).where(ChainHead.id == 1)
    ).one()
    record_id = uuid.uuid4()
    created_at = datetime.now(timezone.utc)
    head = f'{{"id":{json.dumps(str(record_id))},"created_at":{json.dumps(rfc3339(created_at))}'
    tail = memoryview(encoded)[1:] if len(encoded) > 2 else b"}"
    stored = b"".join([head.encode("ascii"), b"," if len(encoded) > 2 else b"", tail])  # one copy
    del tail, encoded
    digest = record_digest(canonical_request, stored, prev_digest, tenant)
    report_json = stored.decode("utf-8")
    del stored
    record = AssessmentRecord(
        id=record_id,
        sequence=sequence,
        tenant=tenant,
        created_at=created_at,
        reference=report["reference"],
        title=report["title"],
        outcome=report["outcome"],
        request_json=canonical_request,
        report_json=report_json,
        digest=digest,
        prev_digest=prev_digest,
        engine_version=report["engine_version"],
        catalogue_version=report["catalogue_version"],
    )
    session.add(record)
    session.execute(update(ChainHead).where(ChainHead.id == 1).values(digest=digest))
    session.flush()
    return record


def find_idempotency_key(session: Session, tenant: str | None, key: str) -> IdempotencyKey | None:
    """The use of ``key`` by organisation ``tenant`` (None: access control off), or None."""
    return session.get(IdempotencyKey, (tenant or "", key))


def add_idempotency_key(session: Session, tenant: str | None, key: str, body_sha256: str,
                        assessment_id: uuid.UUID) -> None:
    """Record that ``key`` made ``assessment_id`` (in the record's own transaction; a twin raises IntegrityError)."""
    session.add(IdempotencyKey(tenant=tenant or "", key=key, body_sha256=body_sha256, assessment_id=assessment_id,
                               created_at=datetime.now(timezone.utc)))
    session.flush()


def get_assessment(session: Session, assessment_id: uuid.UUID) -> AssessmentRecord | None:
    """The record with this id, or None."""
    return session.get(AssessmentRecord, assessment_id)


@dataclass(frozen=True)
class Page:
    """One page of records, newest first; ``next_cursor`` is None on the last page."""

    records: list[AssessmentRecord]
    next_cursor: str | None


def encode_cursor(sequence: int) -> str:
    """Opaque cursor meaning "records older than ``sequence``"."""
    raw = json.dumps({"before": sequence}, separators=(",", ":")).encode()
    return base64.urlsafe_b64encode(raw).decode().rstrip("=")


def decode_cursor(cursor: str) -> int:
    """Inverse of :func:`encode_cursor`.

    :raise ValueError: if the cursor was not made by :func:`encode_cursor`.
    """
    try:
        raw = base64.urlsafe_b64decode(cursor + "=" * (-len(cursor) % 4))
        before = json.loads(raw)["before"]
    except (ValueError, TypeError, KeyError) as exc:
        raise ValueError("not a cursor issued by this service") from exc
    if not isinstance(before, int) or isinstance(before, bool) or before < 1:
        raise ValueError("not a cursor issued by this service")
    return before


def list_assessments(session: Session, *, limit: int, before_sequence: int | None = None,
                     reference: str | None = None, outcome: str | None = None,
                     created_after: datetime | None = None, created_before: datetime | None = None) -> Page:
    """Records matching every given filter, newest (highest sequence) first.

    ``created_after``/``created_before`` are exclusive bounds.
    """
    query = select(AssessmentRecord).order_by(AssessmentRecord.sequence.desc()).limit(limit + 1)
    if before_sequence is not None:
        query = query.where(AssessmentRecord.sequence < before_sequence)
    if reference is not None:
        query = query.where(AssessmentRecord.reference == reference)
    if outcome is not None:
        query = query.where(AssessmentRecord.outcome == outcome)
    if created_after is not None:
        query = query.where(AssessmentRecord.created_at > created_after)
    if created_before is not None:
        query = query.where(AssessmentRecord.created_at < created_before)
    rows = list(session.scalars(query))
    if len(rows) > limit:
        return Page(rows[:limit], encode_cursor(rows[limit - 1].sequence))
    return Page(rows, None)


def ids_of_tenant(session: Session, ids: list[uuid.UUID], tenant: str) -> set[uuid.UUID]:
    """Those of ``ids`` whose records belong to ``tenant``."""
    if not ids:
        return set()
    return set(session.scalars(select(AssessmentRecord.id).where(AssessmentRecord.id.in_(ids),
                                                                AssessmentRecord.tenant == tenant)
                               .execution_options(all_tenants=True)))


def count_assessments(session: Session) -> int:
    """Number of stored records."""
    return session.scalar(select(func.count()).select_from(AssessmentRecord)) or 0


def iter_chain(session: Session, first: int = 1, last: int | None = None,
               batch_size: int = 500) -> Iterator[AssessmentRecord]:
    """Records with ``first <= sequence <= last`` (all by default) in chain order, fetched in batches."""
    seq = first - 1
    while True:
        query = select(AssessmentRecord).where(AssessmentRecord.sequence > seq).execution_options(all_tenants=True)
        if last is not None:
            query = query.where(AssessmentRecord.sequence <= last)
        rows = list(session.scalars(query.order_by(AssessmentRecord.sequence).limit(batch_size)))
        if not rows:
            return
        yield from rows
        seq = rows[-1].sequence


def digest_before(session: Session, sequence: int) -> str | None:
    """Stored digest of the record preceding ``sequence`` (:data:`GENESIS_DIGEST` before the first)."""
    if sequence <= 1:
        return GENESIS_DIGEST
    return session.scalar(select(AssessmentRecord.digest).where(AssessmentRecord.sequence == sequence - 1)
                          .execution_options(all_tenants=True))


def chain_head(session: Session) -> tuple[int, str]:
    """(sequence, digest) of the newest record, ``(0, GENESIS_DIGEST)`` for an empty chain."""
    row = session.execute(select(ChainHead.sequence, ChainHead.digest).where(ChainHead.id == 1)).one()
    return int(row[0]), row[1]


def ping(session: Session) -> None:
    """Round trip to the database (raises on failure)."""
    session.execute(text("SELECT 1"))


# --------------------------------------------------------------------------- wiring


def normalise_url(url: str) -> str:
    """Use the installed PostgreSQL driver (psycopg 3) for bare ``postgresql://``/``postgres://`` URLs.

    >>> normalise_url("postgres://u@db/emf")
    'postgresql+psycopg://u@db/emf'
    >>> normalise_url("sqlite:///x.sqlite3")
    'sqlite:///x.sqlite3'
    """
    for prefix in ("postgresql://", "postgres://"):
        if url.startswith(prefix):
            return "postgresql+psycopg://" + url[len(prefix):]
    return url


def database_url(app: Flask) -> str:
    """``DATABASE_URL`` from the config, or the default SQLite file in the instance folder."""
    url = app.config.get("DATABASE_URL")
    if url:
        return normalise_url(url)
    os.makedirs(app.instance_path, exist_ok=True)
    return "sqlite:///" + os.path.join(app.instance_path, SQLITE_FILENAME)


def _sqlite_pragmas(dbapi_connection: Any, connection_record: Any) -> None:
    cursor = dbapi_connection.cursor()
    cursor.execute("PRAGMA busy_timeout = 15000")
    cursor.execute("PRAGMA foreign_keys = ON")
    # Switching a new file to WAL needs an exclusive lock and SQLite does not wait for it
    # (no busy handler), so a second worker connecting meanwhile is told "locked": retry.
    for attempt in range(_WAL_ATTEMPTS):
        try:
            cursor.execute("PRAGMA journal_mode = WAL")
            break
        except sqlite3.OperationalError:
            if attempt == _WAL_ATTEMPTS - 1:
                raise
            time.sleep(0.02 * (attempt + 1))
    # FULL: each commit is synced to disk before it returns, so an acknowledged (201)
    # assessment survives a power loss, not only a process crash (NORMAL in WAL mode can
    # lose the last commits on power loss); the cost is one fsync per commit.
    cursor.execute("PRAGMA synchronous = FULL")
    cursor.close()


def make_engine(url: str) -> Engine:
    """Engine for ``url``; SQLite gets its pragmas, in-memory SQLite one shared connection."""
    if url.startswith("sqlite"):
        kwargs: dict[str, Any] = {}
        if url in ("sqlite://", "sqlite:///:memory:", "sqlite+pysqlite://"):
            kwargs = {"poolclass": StaticPool, "connect_args": {"check_same_thread": False}}
        engine = create_engine(url, **kwargs)
        event.listen(engine, "connect", _sqlite_pragmas)
        return engine
    return create_engine(url, pool_pre_ping=True)


def create_schema(engine: Engine) -> tuple[str, str]:
    """Bring the database to this release's schema (alembic ``upgrade head``); safe when
    several workers or instances start together (:func:`service.schema_migrations.upgrade`).

    :return: the schema revision before and after, in words.
    """
    from . import schema_migrations

    return schema_migrations.upgrade(engine)


@dataclass
class Storage:
    """What :func:`init_app` keeps in ``app.extensions[EXTENSION_KEY]``."""

    engine: Engine
    sessionmaker: sessionmaker[Session]


def init_app(app: Flask) -> None:
    """Build the engine and session factory, migrate (or check) the schema, close the request session on teardown.

    :raise service.schema_migrations.SchemaStateError: the database is at a revision this
        release cannot use (newer, or not at head while ``MIGRATE_ON_START`` is false).
    """
    from . import schema_migrations

    engine = make_engine(database_url(app))
    try:
        if app.config["MIGRATE_ON_START"]:
            before, after = create_schema(engine)
            if before != after:
                app.logger.info("Database schema migrated from %s to %s.", before, after)
        else:
            schema_migrations.require_head(engine)
    except BaseException:
        engine.dispose()
        raise
    app.extensions[EXTENSION_KEY] = Storage(engine, sessionmaker(engine, expire_on_commit=False))
    app.teardown_appcontext(_close_session)


def storage_of(app: Flask) -> Storage:
    return app.extensions[EXTENSION_KEY]


def get_session() -> Session:
    """The session of the current request (created on first use).

    When the request was authenticated (``g.tenant`` set by :mod:`service.access`), the
    session is scoped to that organisation's rows (module docstring).
    """
    if "db_session" not in g:
        session = storage_of(current_app).sessionmaker()
        if g.get("tenant") is not None:
            session.info["tenant"] = g.tenant
        g.db_session = session
    return g.db_session


def _close_session(exc: BaseException | None) -> None:
    session = g.pop("db_session", None)
    if session is not None:
        session.close()
