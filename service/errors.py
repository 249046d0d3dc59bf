"""Errors as RFC 9457 problem details (``application/problem+json``).

Every non-2xx answer of the service is a problem document::

    {"type": "about:blank", "title": "Not Found", "status": 404,
     "detail": "...", "instance": "/v1/assessments/...", "request_id": "...",
     "errors": [{"pointer": "/cross_section/circuits/0/conductors/2/height_m",
                 "detail": "Must be greater than 0."}]}

``type`` is ``about:blank`` for plain HTTP errors and a ``urn:emf-assess:problem:*``
URI for the service's own kinds.  ``errors`` (an extension member) lists each bad
input: ``pointer`` is an RFC 6901 JSON Pointer into the request body, or
``parameter`` names a bad query parameter.

Mapping (see DEVELOPERS.md, "Error mapping"):

=========================================  ======  ==================================
exception                                  status  type
=========================================  ======  ==================================
werkzeug ``HTTPException`` (404, 405, ...)  as is   about:blank (headers kept: Allow)
marshmallow ``ValidationError``             422     urn:emf-assess:problem:invalid-input
``models.errors.EngineInputError``          422     urn:emf-assess:problem:invalid-input
:class:`ProblemError` raised by views       chosen  chosen
SQLAlchemy ``IntegrityError``               409     urn:emf-assess:problem:conflict
anything else                               500     about:blank, generic detail, logged
=========================================  ======  ==================================
"""

from __future__ import annotations

import json
import re
import uuid
from collections.abc import Iterable, Iterator
from typing import Any

from flask import Flask, Response, g, request
from marshmallow import ValidationError
from sqlalchemy.exc import IntegrityError
from werkzeug.exceptions import HTTPException
from werkzeug.http import HTTP_STATUS_CODES

from models.errors import EngineInputError

PROBLEM_MIME = "application/problem+json"
INVALID_INPUT = "urn:emf-assess:problem:invalid-input"
INVALID_PARAMETER = "urn:emf-assess:problem:invalid-parameter"
CONFLICT = "urn:emf-assess:problem:conflict"

_REQUEST_ID_RE = re.compile(r"^[A-Za-z0-9._-]{1,64}$")
_FIELD_TOKEN_RE = re.compile(r"[^.\[\]]+")


class ProblemError(Exception):
    """Raised by views for a problem that is not an HTTP exception or a schema error.

    Parameters
    ----------
    status : int
        HTTP status code.
    detail : str
        Explanation for this occurrence.
    errors : iterable of dict, optional
        Items for the ``errors`` member (``pointer``/``parameter`` and ``detail``).
    type_ : str
        Problem type URI.
    headers : iterable of (name, value), optional
        Extra response headers (``WWW-Authenticate``, ``Retry-After``).
    """

    def __init__(self, status: int, detail: str, *, errors: Iterable[dict[str, str]] = (),
                 type_: str = "about:blank", title: str | None = None,
                 headers: Iterable[tuple[str, str]] = ()):
        super().__init__(detail)
        self.headers = list(headers)
        self.status = status
        self.detail = detail
        self.errors = list(errors)
        self.type = type_
        self.title = title or HTTP_STATUS_CODES.get(status, "Error")


def escape_token(token: str) -> str:
    """Escape one JSON Pointer reference token (RFC 6901, section 3)."""
    return token.replace("~", "~0").replace("/", "~1")


def pointer(parts: Iterable[object]) -> str:
    """JSON Pointer from path parts.

    >>> pointer(["cross_section", "circuits", 0, "height_m"])
    '/cross_section/circuits/0/height_m'
    >>> pointer([])
    ''
    """
    return "".join("/" + escape_token(str(p)) for p in parts)


def engine_field_to_pointer(field: str) -> str:
    """Map an engine field path to a JSON Pointer into the request body.

    The engine names inputs like ``cross_section.circuits[0].conductors[2].height_m``;
    paths starting at ``circuits``/``earth_wires`` are taken relative to
    ``cross_section``.

    >>> engine_field_to_pointer("cross_section.circuits[0].conductors[2].height_m")
    '/cross_section/circuits/0/conductors/2/height_m'
    >>> engine_field_to_pointer("earth_wires[1].diameter_m")
    '/cross_section/earth_wires/1/diameter_m'
    """
    parts = _FIELD_TOKEN_RE.findall(field or "")
    if parts and parts[0] in ("circuits", "earth_wires"):
        parts.insert(0, "cross_section")
    return pointer(parts)


def flatten_messages(messages: Any, path: tuple[str, ...] = ()) -> Iterator[dict[str, str]]:
    """Turn marshmallow's nested ``messages`` into ``{"pointer", "detail"}`` items.

    ``_schema`` (schema-level) messages belong to the object that holds them.

    >>> list(flatten_messages({"circuits": {0: {"voltage_kv": ["Missing data for required field."]}}}))
    [{'pointer': '/circuits/0/voltage_kv', 'detail': 'Missing data for required field.'}]
    """
    if isinstance(messages, dict):
        for key, value in messages.items():
            sub = path if key == "_schema" else path + (str(key),)
            yield from flatten_messages(value, sub)
    elif isinstance(messages, (list, tuple)):
        for item in messages:
            yield from flatten_messages(item, path)
    else:
        yield {"pointer": pointer(path), "detail": str(messages)}


def request_id() -> str:
    """The id of the current request (client's ``X-Request-Id`` if well-formed, else new)."""
    rid = getattr(g, "request_id", None)
    if rid is None:
        supplied = request.headers.get("X-Request-Id", "")
        rid = supplied if _REQUEST_ID_RE.match(supplied) else uuid.uuid4().hex
        g.request_id = rid
    return rid


def problem_response(status: int, *, title: str | None = None, detail: str | None = None,
                     type_: str = "about:blank", errors: Iterable[dict[str, str]] | None = None,
                     headers: Iterable[tuple[str, str]] = ()) -> Response:
    """Build an ``application/problem+json`` response."""
    body: dict[str, Any] = {
        "type": type_,
        "title": title or HTTP_STATUS_CODES.get(status, "Error"),
        "status": status,
    }
    if detail:
        body["detail"] = detail
    body["instance"] = request.path
    body["request_id"] = request_id()
    if errors is not None:
        body["errors"] = list(errors)
    response = Response(json.dumps(body, ensure_ascii=False), status=status, mimetype=PROBLEM_MIME)
    for name, value in headers:
        if name.lower() not in ("content-type", "content-length"):
            response.headers.add(name, value)
    return response


def _handle_http_exception(exc: HTTPException) -> Response:
    from flask import current_app

    base = exc.get_response()
    detail = exc.description
    if base.status_code == 413:
        detail = f"The request body exceeds the limit of {current_app.config['MAX_CONTENT_LENGTH']} bytes."
    return problem_response(base.status_code, title=exc.name, detail=detail, headers=base.headers.items())


def _handle_validation_error(exc: ValidationError) -> Response:
    errors = list(flatten_messages(exc.messages))
    detail = f"The request has {len(errors)} invalid field(s); see errors."
    return problem_response(422, title="Invalid input", detail=detail, type_=INVALID_INPUT, errors=errors)


def _handle_engine_error(exc: EngineInputError) -> Response:
    errors = [{"pointer": engine_field_to_pointer(exc.field), "detail": exc.message}]
    return problem_response(422, title="Invalid input", detail=exc.message, type_=INVALID_INPUT, errors=errors)


def _handle_problem_error(exc: ProblemError) -> Response:
    return problem_response(exc.status, title=exc.title, detail=exc.detail, type_=exc.type,
                            errors=exc.errors or None, headers=exc.headers)


def _handle_integrity_error(exc: IntegrityError) -> Response:
    from flask import current_app

    current_app.logger.warning("request %s: integrity error: %s", request_id(), exc.orig)
    return problem_response(409, title="Conflict", type_=CONFLICT,
                            detail="The request conflicts with a stored record.")


def _handle_unexpected(exc: Exception) -> Response:
    from flask import current_app

    rid = request_id()
    current_app.logger.exception("request %s: unhandled error", rid)
    return problem_response(500, detail=f"An internal error occurred; quote request id {rid} when reporting it.")


def _add_request_id(response: Response) -> Response:
    """Every response: the request id, and ``nosniff`` so no browser second-guesses a declared type."""
    response.headers["X-Request-Id"] = request_id()
    response.headers["X-Content-Type-Options"] = "nosniff"
    return response


def init_app(app: Flask) -> None:
    """Register the problem-details handlers and the request-id header."""
    app.register_error_handler(HTTPException, _handle_http_exception)
    app.register_error_handler(ValidationError, _handle_validation_error)
    app.register_error_handler(EngineInputError, _handle_engine_error)
    app.register_error_handler(ProblemError, _handle_problem_error)
    app.register_error_handler(IntegrityError, _handle_integrity_error)
    app.register_error_handler(Exception, _handle_unexpected)
    app.after_request(_add_request_id)
