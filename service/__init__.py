"""emf-assess HTTP service: a Flask adapter around the field engine in ``models``.

WSGI entry point: ``service:create_app()`` (gunicorn: ``deploy/gunicorn.conf.py``).
Nothing happens at import time; all configuration is read inside :func:`create_app`.
"""

from __future__ import annotations

from collections.abc import Mapping
from typing import Any

from flask import Flask
from flask_compress import Compress


def create_app(config: Mapping[str, Any] | None = None) -> Flask:
    """Build the application.

    Configuration: :data:`service.config.DEFAULTS`, then ``EMF_*`` environment
    variables, then ``config`` (keys with or without the ``EMF_`` prefix).

    :param config: overrides, e.g. ``{"TESTING": True, "DATABASE_URL": "sqlite://"}``.
    :raise ValueError: on a setting the service cannot run with.
    :raise service.schema_migrations.SchemaStateError: on a database schema it cannot use.
    """
    from . import access, errors, logs, metrics, storage
    from . import config as settings

    app = Flask(__name__, instance_relative_config=True)
    settings.load(app.config, config)
    app.json.sort_keys = False  # reports keep the order they were built in

    logs.init_app(app)
    errors.init_app(app)
    metrics.init_app(app)
    storage.init_app(app)
    access.init_app(app)  # API keys: after logs (request id) and storage, before every view
    Compress(app)  # gzip on Accept-Encoding (COMPRESS_* settings), Vary: Accept-Encoding
    serving = _serving()
    if app.config["WARM_UP_ENGINE"] and serving:
        _warm_up_engine()
    _register_blueprints(app)
    if app.config["BATCH_WORKER"] and not app.testing and serving:
        from . import batches

        batches.resume(app)
    return app


def _serving() -> bool:
    """False when the app was built for a ``flask`` command other than ``run`` (``keys``, ``routes``):
    such a process answers no requests, so it neither compiles the kernels nor starts the batch processor."""
    import click

    ctx = click.get_current_context(silent=True)
    return ctx is None or ctx.info_name in (None, "run")


def _warm_up_engine() -> None:
    """Compile (or load from numba's disk cache) every engine kernel, once per process.

    Runs in each gunicorn worker (no ``preload_app``), i.e. after the fork, as the
    parallel 3-D kernels require; later apps in the same process find them compiled.
    """
    from models.kernels import warm_up

    from . import json_text

    warm_up()
    json_text.warm_up()


def _register_blueprints(app: Flask) -> None:
    """Every blueprint of the service; add new areas here, one line each."""
    from . import api, batch_views, metrics, report_views

    app.register_blueprint(api.bp)
    app.register_blueprint(metrics.bp)  # /metrics, /readyz
    app.register_blueprint(batch_views.bp)  # /v1/batches
    # Reports and audit (service/report_views.py) register their blueprint below.
    app.register_blueprint(report_views.bp)
