"""Structured logs: one JSON object per line, with the request id, and one line per request.

``LOG_FORMAT`` ``"json"`` (the default) gives the application logger a handler that
writes JSON lines to standard error: ``time`` (RFC 3339, UTC), ``level``, ``logger``,
``message``, and inside a request ``request_id`` (the client's ``X-Request-Id`` when
well formed, else a new one; also returned as the ``X-Request-Id`` header), ``method``
and ``path``; exceptions add ``exception`` (the traceback stays in the log, never in a
response).  With ``LOG_REQUESTS`` every answered request adds a line ``"request"`` with
``status`` and ``duration_ms``.  Nothing from request headers or bodies is logged
beyond method and path (so keys and request contents never reach the log).
``LOG_FORMAT`` ``"text"`` keeps Flask's plain handler.
"""

from __future__ import annotations

import json
import logging
import time
from datetime import datetime, timezone

from flask import Flask, Response, g, has_request_context, request

from .errors import request_id


class JsonFormatter(logging.Formatter):
    """A log record as one JSON object (see the module notes for the members)."""

    def format(self, record: logging.LogRecord) -> str:
        entry = {"time": datetime.fromtimestamp(record.created, timezone.utc).isoformat(timespec="milliseconds")
                 .replace("+00:00", "Z"),
                 "level": record.levelname, "logger": record.name, "message": record.getMessage()}
        if has_request_context():
            entry.update(request_id=request_id(), method=request.method, path=request.path)
        for key in ("status", "duration_ms"):
            if hasattr(record, key):
                entry[key] = getattr(record, key)
        if record.exc_info:
            entry["exception"] = self.formatException(record.exc_info)
        return json.dumps(entry, ensure_ascii=False)


def _start() -> None:
    g.log_t0 = time.perf_counter()


def _finish(response: Response) -> Response:
    from flask import current_app

    t0 = g.pop("log_t0", None)
    if t0 is not None:
        current_app.logger.info("request", extra={"status": response.status_code,
                                                  "duration_ms": round((time.perf_counter() - t0) * 1e3, 3)})
    return response


def init_app(app: Flask) -> None:
    """Set up the application logger (``LOG_FORMAT``, ``LOG_LEVEL``) and the per-request line (``LOG_REQUESTS``)."""
    app.logger.setLevel(str(app.config["LOG_LEVEL"]).upper())
    if app.config["LOG_FORMAT"] == "json":
        from flask.logging import default_handler

        app.logger.removeHandler(default_handler)
        handler = logging.StreamHandler()
        handler.setFormatter(JsonFormatter())
        app.logger.handlers = [h for h in app.logger.handlers if not getattr(h, "emf_json", False)]
        handler.emf_json = True  # type: ignore[attr-defined]
        app.logger.addHandler(handler)
    if app.config["LOG_REQUESTS"]:
        app.before_request(_start)
        app.after_request(_finish)
