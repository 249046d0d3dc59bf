"""HTTP routes of the service (one blueprint, thin views).

Each view: read input (schema), call one assessment or storage function, answer.
Errors are raised and formatted by :mod:`service.errors`.
"""

from __future__ import annotations

import json
import time
import uuid
from functools import lru_cache
from pathlib import Path
from typing import Any

from flask import Blueprint, Response, current_app, jsonify, url_for
from sqlalchemy.exc import IntegrityError, SQLAlchemyError
from werkzeug.exceptions import NotFound

from models import catalogue
from models.errors import CatalogueError

from . import idempotency, storage
from .access import current_tenant
from .errors import ProblemError
from .json_text import dumps
from .metrics import ASSESSMENTS_STORED, REPORT_SECONDS
from .inputs import ListQuerySchema, ReferenceLevelQuerySchema, invalid_parameter, json_body, load_query
from .report import compute_report
from .tables import threshold_row

bp = Blueprint("api", __name__)


@bp.get("/healthz")
def healthz() -> Response:
    """Liveness and database check."""
    try:
        session = storage.get_session()
        with session.begin():
            storage.ping(session)
    except SQLAlchemyError:
        current_app.logger.exception("health check: database unreachable")
        raise ProblemError(503, "The database is unreachable.", title="Service Unavailable") from None
    return jsonify({"status": "ok", "database": "ok"})


# --------------------------------------------------------------------------- helpers


def _timed_report(body: Any) -> dict[str, Any]:
    """:func:`service.report.compute_report` with its time recorded (``emf_report_build_seconds``)."""
    t0 = time.perf_counter()
    report = compute_report(body, current_app.config)
    REPORT_SECONDS.labels(report["kind"]).observe(time.perf_counter() - t0)
    return report


def _json_text(text: str) -> Response:
    """A JSON response from text that is already JSON (stored reports are served as stored)."""
    return Response(text, mimetype="application/json")


def _summary(record: storage.AssessmentRecord) -> dict[str, Any]:
    return {
        "id": str(record.id),
        "created_at": storage.rfc3339(record.created_at),
        "title": record.title,
        "reference": record.reference,
        "outcome": record.outcome,
        "engine_version": record.engine_version,
        "catalogue_version": record.catalogue_version,
        "digest": record.digest,
        "url": url_for("api.get_assessment", assessment_id=record.id),
    }


# --------------------------------------------------------------------------- assessments


def _created(record: storage.AssessmentRecord, *, replayed: bool = False) -> tuple[Response, int, dict[str, str]]:
    headers = {"Location": url_for("api.get_assessment", assessment_id=record.id)}
    if replayed:
        headers[idempotency.REPLAYED_HEADER] = "true"
    return _json_text(record.served_json()), 201, headers


@bp.post("/v1/assessments")
def create_assessment() -> tuple[Response, int, dict[str, str]]:
    """Compute an assessment and store it (201 only once the record is committed).

    With an ``Idempotency-Key`` a retry returns the original record (:mod:`service.idempotency`).
    """
    body = json_body()
    key, tenant = idempotency.requested_key(), current_tenant()
    body_sha256 = idempotency.fingerprint(body) if key else ""
    if key and (earlier := idempotency.earlier_record(tenant, key, body_sha256)) is not None:
        return _created(earlier, replayed=True)
    report = _timed_report(body)
    session = storage.get_session()
    try:
        with session.begin():
            record = storage.insert_assessment(session, storage.canonical_json(report["input"]), report, tenant=tenant)
            if key:
                storage.add_idempotency_key(session, tenant, key, body_sha256, record.id)
    except IntegrityError:
        # a twin submission with the same key committed first: answer with its record
        if not key or (earlier := idempotency.earlier_record(tenant, key, body_sha256)) is None:
            raise
        return _created(earlier, replayed=True)
    ASSESSMENTS_STORED.labels(report["kind"]).inc()
    return _created(record)


@bp.get("/v1/assessments/<uuid:assessment_id>")
def get_assessment(assessment_id: uuid.UUID) -> Response:
    """A stored assessment report, as returned at creation."""
    session = storage.get_session()
    with session.begin():
        record = storage.get_assessment(session, assessment_id)
    if record is None:
        raise NotFound(f"No assessment with id {assessment_id}.")
    return _json_text(record.served_json())


@bp.get("/v1/assessments")
def list_assessments() -> Response:
    """Stored assessments, newest first, with filters and cursor pagination."""
    query = load_query(ListQuerySchema())
    limit = min(query.get("limit", current_app.config["PAGE_SIZE_DEFAULT"]), current_app.config["PAGE_SIZE_MAX"])
    before = None
    if "cursor" in query:
        try:
            before = storage.decode_cursor(query["cursor"])
        except ValueError:
            raise invalid_parameter("cursor", "Not a valid cursor.",
                                    "The cursor is not one issued by this service.") from None
    session = storage.get_session()
    with session.begin():
        page = storage.list_assessments(
            session, limit=limit, before_sequence=before, reference=query.get("reference"),
            outcome=query.get("outcome"), created_after=query.get("created_after"),
            created_before=query.get("created_before"))
        data = [_summary(r) for r in page.records]
    return jsonify({"data": data, "pagination": {"limit": limit, "count": len(data),
                                                  "next_cursor": page.next_cursor}})


@bp.post("/v1/evaluate")
def evaluate() -> Response:
    """Compute an assessment without storing it."""
    report = _timed_report(json_body())
    return Response(dumps({"id": None, "created_at": None, **report, "digest": None}), mimetype="application/json")


# --------------------------------------------------------------------------- catalogue and contract


@bp.get("/v1/reference-levels")
def reference_levels() -> Response:
    """The reference-level catalogue with citations, evaluated at one frequency."""
    frequency_hz = load_query(ReferenceLevelQuerySchema())["frequency_hz"]
    try:
        levels = catalogue.levels_at(frequency_hz)
    except CatalogueError as exc:
        raise invalid_parameter("frequency_hz", exc.message) from None
    return jsonify({"catalogue_version": catalogue.CATALOGUE_VERSION, "frequency_hz": frequency_hz,
                    "thresholds": [threshold_row(t) for t in levels]})


@lru_cache(maxsize=4)
def _openapi_document(path: str, mtime: float) -> str:
    import yaml

    with open(path, encoding="utf-8") as fh:
        return json.dumps(yaml.safe_load(fh), ensure_ascii=False)


def openapi_path() -> Path:
    """Location of ``openapi/openapi.yaml`` (beside the ``service`` package)."""
    return Path(__file__).resolve().parent.parent / "openapi" / "openapi.yaml"


@bp.get("/openapi.json")
def openapi_json() -> Response:
    """The OpenAPI 3.1 description of this service."""
    path = openapi_path()
    return Response(_openapi_document(str(path), path.stat().st_mtime), mimetype="application/json")
