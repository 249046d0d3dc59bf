"""Reading a request: the JSON body and the query strings (errors become problem responses)."""

from __future__ import annotations

import json
from typing import Any

from flask import request
from marshmallow import Schema, ValidationError, fields, validate
from werkzeug.exceptions import BadRequest, UnsupportedMediaType

from .errors import INVALID_PARAMETER, ProblemError
from .schema_fields import POSITIVE, TEXT

MAX_CHAIN_PAGE = 100_000
"""Largest ``limit`` of one ``GET /v1/audit/verify-chain`` page (records)."""


def json_body() -> Any:
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


def invalid_parameter(name: str, detail: str, message: str | None = None) -> ProblemError:
    """A 400 problem naming one query parameter."""
    return ProblemError(400, message or detail, type_=INVALID_PARAMETER, title="Invalid query parameter",
                        errors=[{"parameter": name, "detail": detail}])


def load_query(schema: Schema) -> dict[str, Any]:
    """Query parameters loaded with ``schema``; errors become a 400 problem naming each parameter."""
    try:
        return schema.load(request.args.to_dict())
    except ValidationError as exc:
        errors = [{"parameter": name, "detail": " ".join(map(str, msgs)) if isinstance(msgs, list) else str(msgs)}
                  for name, msgs in exc.messages.items()]
        raise ProblemError(400, "Invalid query parameter(s); see errors.", errors=errors,
                           type_=INVALID_PARAMETER, title="Invalid query parameter") from None


class ListQuerySchema(Schema):
    """Query of ``GET /v1/assessments``; ``created_*`` are RFC 3339 with a UTC offset (exclusive bounds)."""

    reference = fields.String(validate=TEXT)
    outcome = fields.String(validate=validate.OneOf(["pass", "fail"]))
    created_after = fields.AwareDateTime(format="iso")
    created_before = fields.AwareDateTime(format="iso")
    limit = fields.Integer(validate=validate.Range(min=1, error="Must be at least 1."))
    cursor = fields.String(validate=validate.Length(min=1, max=200))


class ReferenceLevelQuerySchema(Schema):
    """Query of ``GET /v1/reference-levels``."""

    frequency_hz = fields.Float(load_default=50.0, allow_nan=False, validate=POSITIVE)


class ChainQuerySchema(Schema):
    """Query of ``GET /v1/audit/verify-chain``: a page of the chain by sequence numbers."""

    from_sequence = fields.Integer(load_default=1, strict=False,
                                   validate=validate.Range(min=1, error="Must be at least 1."))
    limit = fields.Integer(load_default=None, validate=validate.Range(
        min=1, max=MAX_CHAIN_PAGE, error=f"Must be between 1 and {MAX_CHAIN_PAGE}."))
