"""Operations endpoints: ``/metrics`` (Prometheus text format) and ``/readyz`` (ready to serve).

Metrics (prometheus-client): requests per route, method and status, their latency,
assessments stored per geometry and the time spent building reports.  Under gunicorn
with several workers set ``PROMETHEUS_MULTIPROC_DIR`` to an empty writable folder
(``deploy/gunicorn.conf.py`` does it): each worker writes its samples there and
``/metrics`` aggregates all workers (prometheus-client's multi-process mode).  The
metric objects are created once per process at import; nothing here reads configuration.

``/readyz`` answers 200 when the database answers and its schema is at this release's
head revision, else 503 (a load balancer sends no traffic to that instance).
``/healthz`` stays the liveness check (process up, database reachable).
"""

from __future__ import annotations

import os
import time

from flask import Blueprint, Flask, Response, current_app, g, jsonify, request
from prometheus_client import CONTENT_TYPE_LATEST, CollectorRegistry, Counter, Histogram, generate_latest
from prometheus_client import REGISTRY, multiprocess
from sqlalchemy.exc import SQLAlchemyError

from . import schema_migrations, storage
from .errors import ProblemError

bp = Blueprint("operations", __name__)

REQUESTS = Counter("emf_http_requests", "HTTP requests answered", ["method", "route", "status"])
LATENCY = Histogram("emf_http_request_duration_seconds", "Time to answer an HTTP request", ["method", "route"],
                    buckets=(0.005, 0.01, 0.025, 0.05, 0.1, 0.25, 0.5, 1.0, 2.5, 5.0, 10.0, 30.0))
ASSESSMENTS_STORED = Counter("emf_assessments_stored", "Assessments stored", ["kind"])
REPORT_SECONDS = Histogram("emf_report_build_seconds", "Time to validate a request and build its report "
                           "(engine, judging, tables)", ["kind"],
                           buckets=(0.001, 0.005, 0.01, 0.025, 0.05, 0.1, 0.25, 0.5, 1.0, 2.5, 5.0, 10.0))


def _route() -> str:
    rule = request.url_rule
    return rule.rule if rule is not None else "unmatched"


def _start() -> None:
    g.metrics_t0 = time.perf_counter()


def _finish(response: Response) -> Response:
    t0 = g.pop("metrics_t0", None)
    if t0 is not None:
        route = _route()
        LATENCY.labels(request.method, route).observe(time.perf_counter() - t0)
        REQUESTS.labels(request.method, route, str(response.status_code)).inc()
    return response


def init_app(app: Flask) -> None:
    """Time every request of ``app``."""
    app.before_request(_start)
    app.after_request(_finish)


@bp.get("/metrics")
def metrics() -> Response:
    """Prometheus metrics of this process, or of every worker in multi-process mode."""
    if os.environ.get("PROMETHEUS_MULTIPROC_DIR"):
        registry = CollectorRegistry()
        multiprocess.MultiProcessCollector(registry)
    else:
        registry = REGISTRY
    return Response(generate_latest(registry), mimetype=CONTENT_TYPE_LATEST)


@bp.get("/readyz")
def readyz() -> Response:
    """Ready when the database answers and its schema is at this release's head revision."""
    head = schema_migrations.head_revision()
    try:
        with storage.storage_of(current_app).engine.connect() as conn:
            current = schema_migrations.current_revisions(conn)
    except SQLAlchemyError:
        raise ProblemError(503, "The database is unreachable.", title="Service Unavailable") from None
    if current != (head,):
        raise ProblemError(503, f"The database schema is at {', '.join(current) or 'no revision'}; this release "
                                f"needs revision {head!r}.", title="Service Unavailable")
    return jsonify({"status": "ready", "database": "ok", "schema_revision": head})
