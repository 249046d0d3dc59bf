"""Configuration defaults and their documentation.

Order of precedence (highest last), applied by :func:`service.create_app`:

1. :data:`DEFAULTS` below;
2. environment variables with the prefix ``EMF_`` (``EMF_DATABASE_URL`` sets
   ``DATABASE_URL``), read with Flask's ``from_prefixed_env`` so values are
   JSON-parsed (``EMF_MAX_POINTS=5001`` becomes the integer 5001);
3. the mapping passed to ``create_app`` (tests); its keys may be given with or
   without the ``EMF_`` prefix.

Nothing here reads the environment at import time.
"""

from __future__ import annotations

from collections.abc import Mapping
from typing import TYPE_CHECKING, Any

if TYPE_CHECKING:
    from flask import Config

ENV_PREFIX = "EMF"

DEFAULTS: dict[str, Any] = {
    # Access control (service.access): every request but the open ones needs an API key of an
    # organisation; false = single-user local use, no keys, nothing scoped.
    "AUTH_REQUIRED": True,
    # SQLAlchemy URL; None means a SQLite file ``emf-assess.sqlite3`` in the
    # Flask instance folder (created on demand).
    "DATABASE_URL": None,
    # Largest accepted request body [bytes]; larger bodies get 413.
    "MAX_CONTENT_LENGTH": 2 * 1024 * 1024,
    # Largest number of evaluation points per request (profile or explicit points).
    "MAX_POINTS": 20_001,
    # Largest number of observation points of a route request (all evaluation sets).
    "MAX_ROUTE_POINTS": 200_000,
    # Largest report a request may produce [bytes], estimated from the request before computing
    # (service.report.report_size_estimate); larger requests get a 422 naming MAX_REPORT_BYTES.
    "MAX_REPORT_BYTES": 256 * 1024 * 1024,
    # Largest number of conductor positions (all circuits) plus earth wires.
    "MAX_CONDUCTORS": 64,
    # Largest grid of a route request (nodes), within MAX_ROUTE_POINTS.
    "MAX_GRID_POINTS": 100_000,
    # Route work bounds, checked after discretisation and before any field is computed: straight
    # segments per discretisation (the E charge solve holds an n x n matrix: 5,000 -> 200 MB, a few
    # seconds), and observation points x segments (kernel evaluations).
    "MAX_SEGMENTS": 5_000,
    "MAX_SEGMENT_POINT_PAIRS": 400_000_000,
    # Compliance batches (POST /v1/batches): most items per batch; each worker's background
    # processor (off with BATCH_WORKER false), its idle poll [s] and the lease after which an
    # item claimed by a worker that died is taken over [s].
    "MAX_BATCH_ITEMS": 500,
    "BATCH_WORKER": True,
    "BATCH_POLL_S": 2.0,
    "BATCH_LEASE_S": 300.0,
    # Page size for GET /v1/assessments: default and upper bound.
    "PAGE_SIZE_DEFAULT": 20,
    "PAGE_SIZE_MAX": 100,
    # Log level of the application logger (DEBUG, INFO, WARNING, ERROR).
    "LOG_LEVEL": "INFO",
    # "json": one JSON object per log line with the request id (service.logs); "text": Flask's plain lines.
    "LOG_FORMAT": "json",
    # One log line per answered request (status, duration), no headers or bodies.
    "LOG_REQUESTS": True,
    # Apply the schema migrations (alembic upgrade head) at start-up, under a lock.  When
    # false, start-up refuses a database that is not at head (run `python -m service.migrate upgrade`).
    "MIGRATE_ON_START": True,
    # Compile (or load from numba's cache) the engine kernels at start-up, so the first
    # request of each worker does not pay for it.
    "WARM_UP_ENGINE": True,
    # Responses compressed with gzip when the client sends Accept-Encoding: gzip (flask-compress):
    # JSON, CSV and GeoJSON of at least COMPRESS_MIN_SIZE bytes, at COMPRESS_LEVEL (1 = fastest;
    # an 18 MB report of 20,001 points becomes about 5 MB in about 0.13 s).
    "COMPRESS_ALGORITHM": "gzip",
    "COMPRESS_LEVEL": 1,
    "COMPRESS_MIN_SIZE": 1024,
    "COMPRESS_MIMETYPES": ["application/json", "application/geo+json", "application/problem+json", "text/csv"],
}

# Documented in README.md "Configuration"; the table there lists these names.
ENVIRONMENT_VARIABLES: dict[str, str] = {
    "EMF_AUTH_REQUIRED": "require an API key on every request but the open ones (true/false)",
    "EMF_DATABASE_URL": "SQLAlchemy database URL",
    "EMF_MAX_CONTENT_LENGTH": "largest request body [bytes]",
    "EMF_MAX_POINTS": "largest number of evaluation points per request",
    "EMF_MAX_ROUTE_POINTS": "largest number of observation points of a route request",
    "EMF_MAX_CONDUCTORS": "largest number of conductor positions plus earth wires",
    "EMF_MAX_GRID_POINTS": "largest number of grid nodes of a route request",
    "EMF_MAX_SEGMENTS": "largest number of straight segments of a route's discretisation (B or E)",
    "EMF_MAX_SEGMENT_POINT_PAIRS": "largest number of observation points x segments of a route request",
    "EMF_MAX_REPORT_BYTES": "largest report a request may produce [bytes] (estimated before computing)",
    "EMF_MAX_BATCH_ITEMS": "most items of one batch",
    "EMF_BATCH_WORKER": "process batch items in a background thread of each worker (true/false)",
    "EMF_BATCH_POLL_S": "idle poll of the batch processor [s]",
    "EMF_BATCH_LEASE_S": "seconds after which a claimed batch item of a dead worker is taken over",
    "EMF_PAGE_SIZE_DEFAULT": "default page size of the assessment list",
    "EMF_PAGE_SIZE_MAX": "largest page size of the assessment list",
    "EMF_LOG_LEVEL": "application log level",
    "EMF_LOG_FORMAT": "json (one object per line, with the request id) or text",
    "EMF_LOG_REQUESTS": "one log line per answered request (true/false)",
    "EMF_MIGRATE_ON_START": "apply the schema migrations at start-up (true/false)",
    "EMF_WARM_UP_ENGINE": "compile the engine kernels at start-up (true/false)",
    "EMF_COMPRESS_LEVEL": "gzip level of compressed responses (1 fastest .. 9 smallest)",
}


def strip_prefix(overrides: Mapping[str, Any]) -> dict[str, Any]:
    """Return ``overrides`` with any leading ``EMF_`` removed from the keys.

    >>> strip_prefix({"EMF_DATABASE_URL": "sqlite://", "TESTING": True})
    {'DATABASE_URL': 'sqlite://', 'TESTING': True}
    """
    prefix = ENV_PREFIX + "_"
    return {(k[len(prefix):] if k.startswith(prefix) else k): v for k, v in overrides.items()}


def load(config: Config, overrides: Mapping[str, Any] | None = None) -> None:
    """Fill ``config`` in the order of precedence above, then :func:`check` it."""
    config.from_mapping(DEFAULTS)
    config.from_prefixed_env(ENV_PREFIX)
    if overrides:
        config.from_mapping(strip_prefix(overrides))
    check(config)


def check(config: Mapping[str, Any]) -> None:
    """Fail fast on values the service cannot run with.

    :raise ValueError: naming the offending setting.
    """
    for key in ("BATCH_POLL_S", "BATCH_LEASE_S"):
        value = config.get(key)
        if isinstance(value, bool) or not isinstance(value, (int, float)) or not value > 0:
            raise ValueError(f"Setting {key} must be a number > 0; instead received {value!r}.")
    for key in ("BATCH_WORKER", "AUTH_REQUIRED", "LOG_REQUESTS", "MIGRATE_ON_START"):
        if not isinstance(config.get(key), bool):
            raise ValueError(f"Setting {key} must be true or false; instead received {config.get(key)!r}.")
    for key in ("MAX_BATCH_ITEMS", "MAX_CONTENT_LENGTH", "MAX_REPORT_BYTES", "MAX_POINTS", "MAX_ROUTE_POINTS", "MAX_CONDUCTORS", "MAX_GRID_POINTS", "MAX_SEGMENTS",
                "MAX_SEGMENT_POINT_PAIRS", "PAGE_SIZE_DEFAULT", "PAGE_SIZE_MAX"):
        value = config.get(key)
        if not isinstance(value, int) or isinstance(value, bool) or value < 1:
            raise ValueError(f"Setting {key} must be a positive integer; instead received {value!r}.")
    level = config.get("COMPRESS_LEVEL")
    if not isinstance(level, int) or isinstance(level, bool) or not 1 <= level <= 9:
        raise ValueError(f"Setting COMPRESS_LEVEL must be an integer from 1 to 9; instead received {level!r}.")
    if config["PAGE_SIZE_DEFAULT"] > config["PAGE_SIZE_MAX"]:
        raise ValueError("Setting PAGE_SIZE_DEFAULT must not exceed PAGE_SIZE_MAX.")
    if config.get("LOG_FORMAT") not in ("json", "text"):
        raise ValueError(f"Setting LOG_FORMAT must be 'json' or 'text'; instead received {config.get('LOG_FORMAT')!r}.")
    if "CREATE_TABLES" in config and config["CREATE_TABLES"] != config["MIGRATE_ON_START"]:
        raise ValueError("Setting CREATE_TABLES was replaced by MIGRATE_ON_START (schema migrations); "
                         f"set EMF_MIGRATE_ON_START instead of EMF_CREATE_TABLES={config['CREATE_TABLES']!r}.")
    url = config.get("DATABASE_URL")
    if url is not None and not isinstance(url, str):
        raise ValueError(f"Setting DATABASE_URL must be a string; instead received {url!r}.")
