"""HTTP routes of the service (one blueprint, thin views).

Each view: read input (schema), call one assessment or storage function, answer.
Errors are raised and formatted by :mod:`service.errors`.
"""

from __future__ import annotations

import json
import uuid
from functools import lru_cache
from pathlib import Path
from typing import Any

from flask import Blueprint, Response, current_app, jsonify, request, url_for
from marshmallow import ValidationError
from sqlalchemy.exc import SQLAlchemyError
from werkzeug.exceptions import BadRequest, NotFound, UnsupportedMediaType

from models import catalogue
from models.errors import CatalogueError

from . import storage
from .assessment import build_report, threshold_row
from .errors import INVALID_PARAMETER, ProblemError
from .route_assessment import build_route_report
from .route_schemas import geometry_kind, load_route_request
from .schemas import ListQuerySchema, ReferenceLevelQuerySchema, load_assessment_request

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


def _json_body() -> Any:
    """The parsed JSON body: 415 if not declared as JSON, 400 if malformed, 413 if too large."""
    if not request.is_json:
        raise UnsupportedMediaType("Send the request body as JSON with Content-Type: application/json.")
    raw = request.get_data(cache=True)  # raises RequestEntityTooLarge over MAX_CONTENT_LENGTH
    try:
        return json.loads(raw)  # NaN/Infinity tokens parse here and are refused by the schemas, by field
    except RecursionError:
        raise BadRequest("The JSON body is nested too deeply.") from None
    except ValueError as exc:  # includes UnicodeDecodeError and over-long integers
        raise BadRequest(f"The body is not valid JSON: {exc}") from None


def _compute_report(body: Any) -> dict[str, Any]:
    """Validate a request body and build its report (the one place both POST routes share).

    Another request geometry (e.g. a route) is dispatched here on the body's shape.
    """
    if geometry_kind(body) == "route":  # a line in map coordinates (3-D): service.route_*
        cap = current_app.config["MAX_ROUTE_POINTS"]
        route_request = load_route_request(body, max_route_points=cap,
                                           max_conductors=current_app.config["MAX_CONDUCTORS"])
        return build_route_report(route_request, max_points=cap)
    request_obj = load_assessment_request(body, max_points=current_app.config["MAX_POINTS"],
                                          max_conductors=current_app.config["MAX_CONDUCTORS"])
    return build_report(request_obj)


def _query(schema: Any) -> dict[str, Any]:
    """Query parameters loaded with ``schema``; errors become a 400 problem naming each parameter."""
    try:
        return schema.load(request.args.to_dict())
    except ValidationError as exc:
        errors = [{"parameter": name, "detail": " ".join(map(str, msgs)) if isinstance(msgs, list) else str(msgs)}
                  for name, msgs in exc.messages.items()]
        raise ProblemError(400, "Invalid query parameter(s); see errors.", errors=errors,
                           type_=INVALID_PARAMETER, title="Invalid query parameter") from None


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


@bp.post("/v1/assessments")
def create_assessment() -> tuple[Response, int, dict[str, str]]:
    """Compute an assessment and store it."""
    report = _compute_report(_json_body())
    session = storage.get_session()
    with session.begin():
        record = storage.insert_assessment(session, storage.canonical_json(report["input"]), report)
    location = url_for("api.get_assessment", assessment_id=record.id)
    return _json_text(record.served_json()), 201, {"Location": location}


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
    query = _query(ListQuerySchema())
    limit = min(query.get("limit", current_app.config["PAGE_SIZE_DEFAULT"]), current_app.config["PAGE_SIZE_MAX"])
    before = None
    if "cursor" in query:
        try:
            before = storage.decode_cursor(query["cursor"])
        except ValueError:
            raise ProblemError(400, "The cursor is not one issued by this service.", type_=INVALID_PARAMETER,
                               title="Invalid query parameter",
                               errors=[{"parameter": "cursor", "detail": "Not a valid cursor."}]) from None
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
    report = _compute_report(_json_body())
    return jsonify({"id": None, "created_at": None, **report, "digest": None})


# --------------------------------------------------------------------------- catalogue and contract


@bp.get("/v1/reference-levels")
def reference_levels() -> Response:
    """The reference-level catalogue with citations, evaluated at one frequency."""
    frequency_hz = _query(ReferenceLevelQuerySchema())["frequency_hz"]
    try:
        levels = catalogue.levels_at(frequency_hz)
    except CatalogueError as exc:
        raise ProblemError(400, exc.message, type_=INVALID_PARAMETER, title="Invalid query parameter",
                           errors=[{"parameter": "frequency_hz", "detail": exc.message}]) from None
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
