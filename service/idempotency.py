"""``Idempotency-Key`` on ``POST /v1/assessments``: a retried submission returns the original record.

A client that did not see the answer to a submission (timeout, dropped connection)
sends it again with the same ``Idempotency-Key`` header (1 to 255 printable ASCII
characters of its choosing, e.g. a UUID).  Keys are per organisation and kept as long
as the record:

* same key, same body (same JSON value: key order and spacing do not matter) -> the
  original assessment, same id, ``201`` with ``Idempotency-Replayed: true``;
* same key, another body -> ``409`` problem of type :data:`KEY_REUSED`, nothing stored;
* two submissions with one key at the same moment: both compute, one commits; the other's
  key row conflicts in its own transaction (rolled back, no record) and it answers with
  the first one's record.

The key row is written in the record's transaction, so a key exists exactly when its
record does.
"""

from __future__ import annotations

import hashlib
import re
from typing import Any

from flask import request

from . import storage
from .errors import ProblemError

HEADER = "Idempotency-Key"
REPLAYED_HEADER = "Idempotency-Replayed"
KEY_REUSED = "urn:emf-assess:problem:idempotency-key-reused"
INVALID_HEADER = "urn:emf-assess:problem:invalid-header"

_KEY_RE = re.compile(r"^[\x21-\x7e](?:[\x20-\x7e]{0,253}[\x21-\x7e])?$")


def requested_key() -> str | None:
    """The request's ``Idempotency-Key``, None if absent; a 400 problem naming the header if malformed."""
    key = request.headers.get(HEADER)
    if key is None:
        return None
    if not _KEY_RE.match(key):
        raise ProblemError(400, f"{HEADER} must be 1 to 255 printable ASCII characters (no leading or trailing "
                                "space).", type_=INVALID_HEADER, title="Invalid header",
                           errors=[{"header": HEADER, "detail": "Must be 1 to 255 printable ASCII characters."}])
    return key


def fingerprint(body: Any) -> str:
    """SHA-256 of the body's canonical JSON (of the raw bytes when it has no canonical form, e.g. NaN)."""
    try:
        text = storage.canonical_json(body).encode("utf-8")
    except (ValueError, TypeError):
        text = request.get_data(cache=True)
    return hashlib.sha256(text).hexdigest()


def earlier_record(tenant: str | None, key: str, body_sha256: str) -> storage.AssessmentRecord | None:
    """The record an earlier use of ``key`` made with this body; None if the key is new.

    :raise ProblemError: 409 when the key was used with another body.
    """
    session = storage.get_session()
    with session.begin():
        used = storage.find_idempotency_key(session, tenant, key)
        if used is None:
            return None
        if used.body_sha256 != body_sha256:
            raise ProblemError(409, f"This {HEADER} was used with a different request body; use a new key for a "
                                    "new submission.", type_=KEY_REUSED, title="Idempotency key reused",
                               errors=[{"header": HEADER, "detail": "Already used with a different body."}])
        return storage.get_assessment(session, used.assessment_id)
