"""HTTP routes of the service (one blueprint, thin views).

Each view: read input (schema), call one assessment or storage function, answer.
Errors are raised and formatted by :mod:`service.errors`.
"""

from __future__ import annotations

import json
import uuid
from importlib import resources
from typing import Any

from flask import Blueprint, Response, current_app, jsonify, request, url_for
from sqlalchemy.exc import SQLAlchemyError
from werkzeug.exceptions import NotFound, UnsupportedMediaType

from . import storage
from .errors import ProblemError

bp = Blueprint("api", __name__)


@bp.get("/healthz")
def healthz() -> Response | tuple[Response, int]:
    """Liveness and database check."""
    try:
        session = storage.get_session()
        with session.begin():
            storage.ping(session)
    except SQLAlchemyError:
        current_app.logger.exception("health check: database unreachable")
        raise ProblemError(503, "The database is unreachable.", title="Service Unavailable") from None
    return jsonify({"status": "ok", "database": "ok"})
