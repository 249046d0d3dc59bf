"""Audit checks of stored assessments (pure: records in, plain dicts out; nothing is written).

* :func:`check_record` -- tamper evidence for one record: its stored digest against
  :func:`service.storage.record_digest` of its stored columns, and the columns that
  the digest does not cover (id, created_at, title, reference, outcome, versions)
  against the digested report JSON.
* :func:`compare_reports` -- a recomputed report against the stored one, value by
  value, within :data:`RTOL` / :data:`ATOL`; lists what moved by JSON Pointer.
* :func:`verify_chain` -- walks the records in ``sequence`` order and reports the first
  place where the chain breaks: an altered row (digest mismatch), a deleted row
  (sequence gap and ``prev_digest`` not linking to the preceding record), or rows
  deleted at the end (the chain head no longer matches the last record).
"""

from __future__ import annotations

import json
import math
from collections.abc import Iterable, Mapping
from typing import Any

from .errors import escape_token
from .storage import GENESIS_DIGEST, AssessmentRecord, canonical_json, record_digest, rfc3339

RTOL = 1e-9
"""Relative tolerance of :func:`compare_reports` (values agree if |a-b| <= ATOL + RTOL max(|a|,|b|))."""

ATOL = 1e-12
"""Absolute tolerance [presentation units: kV/m, µT, m, deg, -]; far below any meaningful field."""

PHASE_FLOOR = 1e-9
"""Phase angles [deg] of components smaller than this [kV/m or µT] are not compared (numerical noise)."""

NOT_RECOMPUTED = frozenset({"id", "created_at", "digest", "engine_version", "catalogue_version"})
"""Top-level report members that a recomputation does not reproduce (compared separately or not at all)."""

MAX_LISTED = 100
"""At most this many moved values / chain breaks are listed (the counts are complete)."""


def _close(a: float, b: float, rtol: float, atol: float) -> bool:
    if math.isnan(a) or math.isnan(b):
        return math.isnan(a) and math.isnan(b)
    return abs(a - b) <= atol + rtol * max(abs(a), abs(b))


def _is_number(v: Any) -> bool:
    return isinstance(v, (int, float)) and not isinstance(v, bool)


def _phase_magnitude(container: Mapping[str, Any], key: str) -> float | None:
    stem = key[: -len("_phase_deg")] + "_"
    for other, value in container.items():
        if other.startswith(stem) and not other.endswith("_phase_deg") and _is_number(value):
            return abs(float(value))
    return None


def compare_reports(stored: Any, recomputed: Any, *, rtol: float = RTOL, atol: float = ATOL,
                    skip: frozenset[str] = NOT_RECOMPUTED) -> tuple[int, list[dict[str, Any]]]:
    """Compare two report trees.

    Numbers agree when ``|a - b| <= atol + rtol * max(|a|, |b|)``; phase angles
    (``*_phase_deg``) are compared modulo 360 and skipped where both the stored and
    recomputed component magnitude is below :data:`PHASE_FLOOR`; other values must be
    equal.  Top-level keys in ``skip`` are ignored.

    Returns
    -------
    values_compared : int
        Number of leaf values compared.
    differences : list of dict
        ``{"path": <JSON Pointer>, "stored": ..., "recomputed": ...}`` (plus ``"reason"``
        for a structural difference), in document order.
    """
    diffs: list[dict[str, Any]] = []
    count = 0

    def walk(a: Any, b: Any, path: str, parent_a: Any, parent_b: Any, key: str | None) -> None:
        nonlocal count
        if isinstance(a, Mapping) and isinstance(b, Mapping):
            for k in list(a) + [k for k in b if k not in a]:
                if path == "" and k in skip:
                    continue
                sub = f"{path}/{escape_token(str(k))}"
                if k not in b or k not in a:
                    diffs.append({"path": sub, "stored": a.get(k), "recomputed": b.get(k),
                                  "reason": "missing in the recomputed report" if k not in b else
                                  "not in the stored report"})
                    continue
                walk(a[k], b[k], sub, a, b, str(k))
            return
        if isinstance(a, list) and isinstance(b, list):
            if len(a) != len(b):
                diffs.append({"path": path, "stored": f"{len(a)} items", "recomputed": f"{len(b)} items",
                              "reason": "different number of items"})
            for i, (x, y) in enumerate(zip(a, b)):
                walk(x, y, f"{path}/{i}", a, b, None)
            return
        count += 1
        if _is_number(a) and _is_number(b):
            fa, fb = float(a), float(b)
            if key is not None and key.endswith("_phase_deg") and isinstance(parent_a, Mapping):
                ma, mb = _phase_magnitude(parent_a, key), _phase_magnitude(parent_b, key)
                if ma is not None and mb is not None and ma < PHASE_FLOOR and mb < PHASE_FLOOR:
                    return
                delta = (fa - fb + 180.0) % 360.0 - 180.0
                if abs(delta) > atol + rtol * 360.0:
                    diffs.append({"path": path, "stored": a, "recomputed": b})
                return
            if not _close(fa, fb, rtol, atol):
                diffs.append({"path": path, "stored": a, "recomputed": b})
            return
        if a != b or type(a) is not type(b):
            diffs.append({"path": path, "stored": a, "recomputed": b})

    walk(stored, recomputed, "", None, None, None)
    return count, diffs


def record_problems(record: AssessmentRecord) -> list[str]:
    """Reasons why ``record`` is not as stored by the service (empty list = intact)."""
    problems = []
    if record_digest(record.request_json, record.report_json, record.prev_digest, record.tenant) != record.digest:
        problems.append("the stored digest does not match the stored request, report and prev_digest "
                        "(the row was altered)")
    try:
        report = json.loads(record.report_json)
        request = json.loads(record.request_json)
    except ValueError:
        return problems + ["the stored report or request is not valid JSON"]
    expected = {
        "id": str(record.id), "created_at": rfc3339(record.created_at), "title": record.title,
        "reference": record.reference, "outcome": record.outcome, "engine_version": record.engine_version,
        "catalogue_version": record.catalogue_version,
    }
    for key, column in expected.items():
        if report.get(key) != column:
            problems.append(f"column {key} ({column!r}) differs from the digested report ({report.get(key)!r})")
    if canonical_json(report.get("input")) != canonical_json(request):
        problems.append("the stored request differs from the report's input")
    return problems


def check_record(record: AssessmentRecord) -> dict[str, Any]:
    """Tamper evidence for one record (see module docstring)."""
    recomputed = record_digest(record.request_json, record.report_json, record.prev_digest, record.tenant)
    problems = record_problems(record)
    return {
        "sequence": record.sequence,
        "stored_digest": record.digest,
        "recomputed_digest": recomputed,
        "digest_matches": recomputed == record.digest,
        "consistent": not problems,
        "problems": problems,
    }


def verify_chain(records: Iterable[AssessmentRecord], head: tuple[int, str], *, from_sequence: int = 1,
                 anchor_digest: str | None = GENESIS_DIGEST, check_head: bool = True) -> dict[str, Any]:
    """Walk ``records`` (ascending ``sequence``) and check every digest and link.

    Parameters
    ----------
    records : iterable of AssessmentRecord
        The records of the checked stretch of the chain, in chain order: all of them,
        or those from ``from_sequence`` on (a page).
    head : (int, str)
        ``(sequence, digest)`` of the chain head row (:func:`service.storage.chain_head`).
    from_sequence : int
        Sequence the stretch starts at (1 = the whole chain).
    anchor_digest : str or None
        Stored digest of the record at ``from_sequence - 1`` (the genesis digest for
        ``from_sequence = 1``); None when that record is missing, which is a break.
    check_head : bool
        Compare the head row with the last record (only when the stretch reaches the head).

    Returns
    -------
    dict
        ``ok``, ``records_checked``, ``breaks_found``, ``first_break`` (``None`` or
        ``{"sequence", "id", "reasons"}``), ``breaks`` (at most :data:`MAX_LISTED`),
        ``head``, ``last_sequence`` (of the last record checked, ``from_sequence - 1``
        when none).  The link of each record is checked against the *stored* digest of
        its predecessor, so an altered row breaks at that row, a row deleted from the
        middle breaks at its successor, and rows deleted from the end break at the head.
    """
    prev_digest, expected_seq = anchor_digest, from_sequence
    checked, breaks = 0, []
    last_seq, last_digest = from_sequence - 1, anchor_digest
    for rec in records:
        checked += 1
        reasons = []
        if rec.sequence != expected_seq:
            missing = (f"sequence {expected_seq}" if rec.sequence == expected_seq + 1 else
                       f"sequences {expected_seq}..{rec.sequence - 1}")
            reasons.append(f"sequence gap: expected {expected_seq}, found {rec.sequence} ({missing} missing: "
                           "records deleted)" if rec.sequence > expected_seq else
                           f"sequence out of order: expected {expected_seq}, found {rec.sequence}")
        if prev_digest is None and rec.sequence == from_sequence:
            reasons.append(f"no record at sequence {from_sequence - 1}, the predecessor of this page's first "
                           "record (record deleted)")
        elif prev_digest is not None and rec.prev_digest != prev_digest:
            reasons.append("prev_digest does not equal the digest of the preceding record "
                           f"(expected {prev_digest[:16]}..., found {rec.prev_digest[:16]}...)")
        reasons.extend(record_problems(rec))
        if reasons:
            breaks.append({"sequence": rec.sequence, "id": str(rec.id), "reasons": reasons})
        prev_digest, expected_seq = rec.digest, rec.sequence + 1
        last_seq, last_digest = rec.sequence, rec.digest
    head_seq, head_digest = head
    if check_head and (head_seq, head_digest) != (last_seq, last_digest):
        shown = "none" if last_digest is None else f"{last_digest[:16]}..."
        breaks.append({"sequence": head_seq, "id": None, "reasons": [
            f"chain head is at sequence {head_seq} (digest {head_digest[:16]}...) but the last record is at "
            f"sequence {last_seq} (digest {shown}): records deleted at the end, or the head "
            "row altered"]})
    return {
        "ok": not breaks,
        "records_checked": checked,
        "breaks_found": len(breaks),
        "first_break": breaks[0] if breaks else None,
        "breaks": breaks[:MAX_LISTED],
        "head": {"sequence": head_seq, "digest": head_digest},
        "last_sequence": last_seq,
    }
