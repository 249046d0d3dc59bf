"""Routes for reports, exports and audit (blueprint ``reports``; thin views).

* ``GET /v1/assessments/{id}/report`` -- content negotiation on ``Accept``:
  ``application/json`` (the stored report), ``text/html`` (printable page),
  ``text/csv`` (one row per point); ``?format=json|html|csv`` overrides ``Accept``.
  Anything else: 406 problem.
* ``GET /v1/assessments/{id}/geojson`` -- ``application/geo+json`` for route
  assessments, RFC 7946 lon/lat (``?coordinates=native``: the request's projected
  coordinates, not RFC 7946); a cross-section assessment has no map geometry: 404 problem of type
  :data:`NO_GEOMETRY` (the resource does not exist for it).
* ``GET /v1/assessments/{id}/geopackage`` -- OGC GeoPackage (route CRS), route assessments.
* ``GET /v1/assessments/{id}/geotiff`` -- GeoTIFF of the field grid, assessments with a grid.
* ``POST /v1/assessments/{id}/verify`` -- recompute with the current engine and
  catalogue, compare within :data:`service.audit.RTOL`/``ATOL``, check the digest.
  Read-only: the record is never changed.
* ``GET /v1/audit/verify-chain`` -- walk the global record chain, report the first break.
"""

from __future__ import annotations

import json
import threading
import uuid
from collections import OrderedDict
from datetime import datetime, timezone
from typing import Any

from flask import Blueprint, Response, current_app, jsonify, request, url_for
from marshmallow import ValidationError
from werkzeug.exceptions import NotAcceptable, NotFound

from models.errors import EngineInputError

from . import audit, export_geopackage, export_geotiff, reports, storage
from .access import current_tenant
from .errors import ProblemError
from .inputs import ChainQuerySchema, invalid_parameter, load_query
from .json_text import plain
from .report import compute_report

bp = Blueprint("reports", __name__)

NO_GEOMETRY = "urn:emf-assess:problem:no-geometry"

REPORT_RENDERER_VERSION = "1"
"""Bumped when the HTML/CSV/GeoJSON rendering changes (part of the ETag)."""

FORMATS = {"json": "application/json", "html": reports.HTML_MIME, "csv": reports.CSV_MIME}

# Self-contained page: no scripts, no external loads; styles are inline.
HTML_CSP = "default-src 'none'; style-src 'unsafe-inline'; img-src data:; base-uri 'none'; form-action 'none'"


def _record(assessment_id: uuid.UUID) -> storage.AssessmentRecord:
    session = storage.get_session()
    with session.begin():
        record = storage.get_assessment(session, assessment_id)
    if record is None:
        raise NotFound(f"No assessment with id {assessment_id}.")
    return record


def _negotiate() -> str:
    fmt = request.args.get("format")
    if fmt is not None:
        if fmt not in FORMATS:
            raise invalid_parameter("format", f"Must be one of {', '.join(FORMATS)}.",
                                    f"format must be one of {', '.join(FORMATS)}; instead received {fmt!r}.")
        return FORMATS[fmt]
    if not request.headers.get("Accept"):
        return "application/json"  # no Accept header: any type is acceptable (RFC 9110, 12.5.1)
    best = request.accept_mimetypes.best_match(list(FORMATS.values()))
    if best is None:
        raise NotAcceptable("This report is available as application/json, text/html or text/csv "
                            "(or choose with ?format=json|html|csv).")
    return best


def _choice(name: str, allowed: tuple[str, ...], default: str) -> str:
    """Query parameter ``name`` that must be one of ``allowed`` (400 problem naming it otherwise)."""
    value = request.args.get(name, default)
    if value not in allowed:
        raise invalid_parameter(name, f"Must be one of {', '.join(allowed)}.",
                                f"{name} must be one of {', '.join(allowed)}; instead received {value!r}.")
    return value


class _RenderCache:
    """Rendered HTML/CSV by (record digest, format): stored records never change, so neither do their pages."""

    def __init__(self, size: int = 32):
        self.size, self._items, self._lock = size, OrderedDict(), threading.Lock()

    def get(self, key: tuple[str, str], render) -> str:
        with self._lock:
            if key in self._items:
                self._items.move_to_end(key)
                return self._items[key]
        text = render()
        with self._lock:
            self._items[key] = text
            while len(self._items) > self.size:
                self._items.popitem(last=False)
        return text


_CACHE = _RenderCache()


def _finish(body: str | bytes, mimetype: str, record: storage.AssessmentRecord, fmt: str, *,
            filename: str | None = None, vary: bool = True, disposition: str = "inline") -> Response:
    response = Response(body, mimetype=mimetype)
    response.set_etag(f"{record.digest[:32]}-{fmt}-{REPORT_RENDERER_VERSION}")
    response.headers["Cache-Control"] = "private, max-age=0, must-revalidate"
    if vary:
        response.vary.add("Accept")
    if filename:
        response.headers["Content-Disposition"] = f'{disposition}; filename="{filename}"'
    return response.make_conditional(request)


@bp.get("/v1/assessments/<uuid:assessment_id>/report")
def get_report(assessment_id: uuid.UUID) -> Response:
    """The stored assessment as JSON, a printable HTML page or CSV (content negotiation)."""
    record = _record(assessment_id)
    mimetype = _negotiate()
    report = record.report()
    if mimetype == "application/json":
        served = record.served_json() if hasattr(record, "served_json") else json.dumps(report, ensure_ascii=False)
        return _finish(served, "application/json", record, "json")
    if mimetype == reports.CSV_MIME:
        text = _CACHE.get((record.digest, "csv"), lambda: reports.render_csv(report))
        return _finish(text, "text/csv", record, "csv", filename=f"assessment-{assessment_id}.csv")
    links = {"JSON": url_for("reports.get_report", assessment_id=assessment_id, format="json"),
             "CSV": url_for("reports.get_report", assessment_id=assessment_id, format="csv")}
    if reports.is_route_report(report):
        links["GeoJSON"] = url_for("reports.get_geojson", assessment_id=assessment_id)
        links["GeoPackage"] = url_for("reports.get_geopackage", assessment_id=assessment_id)
        if isinstance((report.get("results") or {}).get("grid"), dict):
            links["GeoTIFF"] = url_for("reports.get_geotiff", assessment_id=assessment_id)
    text = _CACHE.get((record.digest, "html"), lambda: reports.render_html(report, links=links))
    response = _finish(text, "text/html", record, "html")
    response.headers["Content-Security-Policy"] = HTML_CSP
    return response


@bp.get("/v1/assessments/<uuid:assessment_id>/geojson")
def get_geojson(assessment_id: uuid.UUID) -> Response:
    """Evaluated points, receptors and exposure zones of a route assessment as GeoJSON."""
    record = _record(assessment_id)
    native = _choice("coordinates", ("lonlat", "native"), "lonlat") == "native"
    try:
        collection = reports.render_geojson(record.report(), native=native)
    except reports.NotARouteReport as exc:
        raise _not_a_route(assessment_id, exc) from None
    return _finish(json.dumps(collection, ensure_ascii=False), reports.GEOJSON_MIME, record,
                   "geojson-native" if native else "geojson",
                   filename=f"assessment-{assessment_id}.geojson", vary=False)


def _not_a_route(assessment_id: uuid.UUID, exc: Exception) -> ProblemError:
    return ProblemError(404, f"Assessment {assessment_id} is a cross-section assessment: {exc}",
                        type_=NO_GEOMETRY, title="No map geometry")


@bp.get("/v1/assessments/<uuid:assessment_id>/geopackage")
def get_geopackage(assessment_id: uuid.UUID) -> Response:
    """Route, supports, right-of-way edges, evaluated points, receptors and zones as an OGC GeoPackage."""
    record = _record(assessment_id)
    try:
        body = export_geopackage.render_geopackage(record.report())
    except reports.NotARouteReport as exc:
        raise _not_a_route(assessment_id, exc) from None
    return _finish(body, export_geopackage.GEOPACKAGE_MIME, record, "gpkg",
                   filename=f"assessment-{assessment_id}.gpkg", vary=False, disposition="attachment")


@bp.get("/v1/assessments/<uuid:assessment_id>/geotiff")
def get_geotiff(assessment_id: uuid.UUID) -> Response:
    """The field grid (E and B resultant bands) as GeoTIFF in the grid's CRS."""
    record = _record(assessment_id)
    try:
        body = export_geotiff.render_geotiff(record.report())
    except export_geotiff.NoGrid as exc:
        raise ProblemError(404, f"Assessment {assessment_id}: {exc}", type_=NO_GEOMETRY,
                           title="No field grid") from None
    return _finish(body, export_geotiff.GEOTIFF_MIME, record, "geotiff",
                   filename=f"assessment-{assessment_id}.tif", vary=False, disposition="attachment")


def _recomputation(record: storage.AssessmentRecord, stored: dict[str, Any]) -> dict[str, Any]:
    """Recompute a stored canonical request with today's engine and catalogue and compare.

    The stored request goes through the same validation and dispatch as a new one
    (:func:`service.report.compute_report`), so a request that would be refused today
    is reported as not recomputable.
    """
    out: dict[str, Any] = {"tolerance": {"rtol": audit.RTOL, "atol": audit.ATOL,
                                         "rule": "|stored - recomputed| <= atol + rtol * max(|stored|, |recomputed|)"}}
    try:
        fresh = plain(compute_report(json.loads(record.request_json), current_app.config))
    except (ValidationError, EngineInputError, ValueError) as exc:
        detail = exc.messages if isinstance(exc, ValidationError) else str(exc)
        return {**out, "matches": None, "error": f"The stored request no longer loads or evaluates: {detail}"}
    compared, moved = audit.compare_reports(stored, fresh)
    return {
        **out,
        "matches": not moved,
        "values_compared": compared,
        "moved_count": len(moved),
        "moved": moved[:audit.MAX_LISTED],
        "engine_version": {"stored": stored.get("engine_version"), "current": fresh.get("engine_version")},
        "catalogue_version": {"stored": stored.get("catalogue_version"), "current": fresh.get("catalogue_version")},
    }


@bp.post("/v1/assessments/<uuid:assessment_id>/verify")
def verify_assessment(assessment_id: uuid.UUID) -> Response:
    """Recompute a stored assessment and check its digest (changes nothing)."""
    record = _record(assessment_id)
    integrity = audit.check_record(record)
    try:
        stored = json.loads(record.report_json)
    except ValueError:
        stored = None
    recomputation = (_recomputation(record, stored) if isinstance(stored, dict) else
                     {"matches": None, "error": "The stored report is not valid JSON."})
    if not integrity["consistent"]:
        verdict = "tampered"
    elif recomputation.get("matches") is None:
        verdict = "not_recomputable"
    else:
        verdict = "match" if recomputation["matches"] else "mismatch"
    return jsonify({
        "id": str(record.id),
        "verified_at": storage.rfc3339(datetime.now(timezone.utc)),
        "verdict": verdict,
        "record": integrity,
        "recomputation": recomputation,
        "record_modified": False,
    })


def _redact_other_organisations(session, result: dict[str, Any]) -> None:
    """With access control on, a break in another organisation's record is reported without its id.

    The chain is global (one order for all organisations), so every caller sees where it
    breaks, but only its own records are named.  ``first_break`` is ``breaks[0]`` (one object).
    """
    tenant = current_tenant()
    if tenant is None:
        return
    named = [b for b in result["breaks"] if b["id"] is not None]
    own = storage.ids_of_tenant(session, [uuid.UUID(b["id"]) for b in named], tenant)
    for item in named:
        if uuid.UUID(item["id"]) not in own:
            item["id"] = None
            item["reasons"].append("the record belongs to another organisation")


@bp.get("/v1/audit/verify-chain")
def verify_chain() -> Response:
    """Check the stored records' digests and links: the whole chain, or one page of it.

    ``from_sequence`` (default 1) and ``limit`` (default: up to the head) select the
    records ``from_sequence .. from_sequence + limit - 1``; the first one's link is
    checked against the stored digest of its predecessor, and the head row only when
    the page reaches it.  ``next_from_sequence`` gives the next page (null at the end).
    """
    query = load_query(ChainQuerySchema())
    first, limit = query["from_sequence"], query["limit"]
    session = storage.get_session()
    with session.begin():
        head = storage.chain_head(session)
        # Records appended after the head was read (concurrent inserts) are not part of this check.
        if first > max(head[0], 1):
            raise invalid_parameter("from_sequence", f"Must be at most {max(head[0], 1)}, the chain head's sequence.",
                                    f"from_sequence is beyond the chain head (sequence {head[0]}).")
        last = head[0] if limit is None else min(head[0], first + limit - 1)
        result = audit.verify_chain(storage.iter_chain(session, first, last), head, from_sequence=first,
                                    anchor_digest=storage.digest_before(session, first), check_head=last >= head[0])
        _redact_other_organisations(session, result)
    result.update({"from_sequence": first, "to_sequence": max(last, first - 1),
                   "complete": last >= head[0], "next_from_sequence": last + 1 if last < head[0] else None})
    result["checked_at"] = storage.rfc3339(datetime.now(timezone.utc))
    return jsonify(result)
