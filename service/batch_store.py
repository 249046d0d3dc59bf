"""Storage of compliance batches: the batch, its items, and claiming items for processing.

A batch is stored with all its items (status ``pending``) in one transaction before
anything is computed.  A processor claims one item at a time (``claim_next``: status
``running``, a claim token and the time), computes it outside any transaction, and
finishes it (``finish_item``) in one transaction that first re-checks its claim and then
stores the assessment: an item ends ``done`` (with its assessment) or ``error`` (with its
problem document) exactly once.  A processor that dies leaves its item ``running``; once
the claim is older than the lease, another processor takes it over, and a late finish of
the first is refused by the claim check.  So a worker restart neither loses nor
duplicates items.  Functions take the session first and never commit.
"""

from __future__ import annotations

import json
import uuid
from dataclasses import dataclass
from datetime import datetime, timedelta, timezone
from typing import Any

from sqlalchemy import and_, or_, select, tuple_, update
from sqlalchemy.orm import Session

from .storage import AssessmentRecord, BatchItem, BatchRecord, insert_assessment

STATUSES = ("pending", "running", "done", "error")


@dataclass(frozen=True)
class Claim:
    """An item claimed for processing."""

    batch_id: uuid.UUID
    position: int
    request_json: str
    token: str
    tenant: str | None = None


def create_batch(session: Session, title: str, items: list[tuple[str, Any]], *,
                 tenant: str | None = None) -> BatchRecord:
    """Store a batch of organisation ``tenant`` and its items (``(name, request body)`` each, all ``pending``)."""
    batch = BatchRecord(id=uuid.uuid4(), created_at=datetime.now(timezone.utc), title=title, item_count=len(items),
                        tenant=tenant)
    session.add(batch)
    session.flush()
    session.add_all(BatchItem(batch_id=batch.id, position=i, name=name, status="pending",
                              request_json=json.dumps(body, ensure_ascii=False))
                    for i, (name, body) in enumerate(items))
    session.flush()
    return batch


def get_batch(session: Session, batch_id: uuid.UUID) -> BatchRecord | None:
    return session.get(BatchRecord, batch_id)


def batch_items(session: Session, batch_id: uuid.UUID) -> list[BatchItem]:
    """The items of a batch in submission order."""
    return list(session.scalars(select(BatchItem).where(BatchItem.batch_id == batch_id)
                                .order_by(BatchItem.position)))


def _claimable(now: datetime, lease_s: float):
    stale = now - timedelta(seconds=lease_s)
    return or_(BatchItem.status == "pending", and_(BatchItem.status == "running", BatchItem.claimed_at < stale))


def claim_next(session: Session, *, lease_s: float, now: datetime | None = None) -> Claim | None:
    """Claim the oldest pending item (or a running one whose claim is older than ``lease_s``); None if none.

    One ``UPDATE ... WHERE (batch_id, position) IN (SELECT ... LIMIT 1)``: a write as the
    transaction's first statement (SQLite takes its write lock at once; PostgreSQL skips
    rows other processors have locked), then the claimed row is read back by its token.
    """
    now = now or datetime.now(timezone.utc)
    token = uuid.uuid4().hex
    candidate = (select(BatchItem.batch_id, BatchItem.position).where(_claimable(now, lease_s))
                 .order_by(BatchItem.batch_id, BatchItem.position).limit(1))
    if session.get_bind().dialect.name == "postgresql":
        candidate = candidate.with_for_update(skip_locked=True)
    session.execute(update(BatchItem).where(tuple_(BatchItem.batch_id, BatchItem.position).in_(candidate))
                    .values(status="running", claim=token, claimed_at=now).execution_options(synchronize_session=False))
    row = session.execute(select(BatchItem.batch_id, BatchItem.position, BatchItem.request_json, BatchRecord.tenant)
                          .join(BatchRecord, BatchRecord.id == BatchItem.batch_id)
                          .where(BatchItem.claim == token)).first()
    return None if row is None else Claim(row.batch_id, row.position, row.request_json, token, row.tenant)


def finish_item(session: Session, claim: Claim, *, report: dict[str, Any] | None = None,
                canonical_request: str | None = None, summary: dict[str, Any] | None = None,
                problem: dict[str, Any] | None = None) -> AssessmentRecord | None | bool:
    """End a claimed item: store its assessment (``report``) or its ``problem``.

    Returns False when the claim is no longer this processor's (the item was taken over
    or already ended: nothing is written); else the stored record (or None for a problem).
    The claim check is the transaction's first statement, a write, so it also takes the
    write lock before the assessment is appended to the chain.  The assessment belongs to
    the batch's organisation (``claim.tenant``).
    """
    now = datetime.now(timezone.utc)
    values: dict[str, Any] = {"status": "error" if report is None else "done", "finished_at": now, "claim": None}
    if problem is not None:
        values["problem_json"] = json.dumps(problem, ensure_ascii=False)
    if summary is not None:
        values.update(summary)
    owned = session.execute(update(BatchItem).where(
        BatchItem.batch_id == claim.batch_id, BatchItem.position == claim.position,
        BatchItem.status == "running", BatchItem.claim == claim.token).values(**values))
    if owned.rowcount != 1:
        return False
    if report is None:
        return None
    record = insert_assessment(session, canonical_request, report, tenant=claim.tenant)
    session.execute(update(BatchItem).where(BatchItem.batch_id == claim.batch_id,
                                            BatchItem.position == claim.position)
                    .values(assessment_id=record.id))
    return record


def has_unfinished(session: Session) -> bool:
    """True when some item is pending or running (a restarted worker has work)."""
    return session.execute(select(BatchItem.position).where(BatchItem.status.in_(("pending", "running")))
                           .limit(1)).first() is not None
