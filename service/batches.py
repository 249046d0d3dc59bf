"""Processing compliance batches: claim an item, assess it, store it (see :mod:`service.batch_store`).

Every gunicorn worker runs one background thread (:func:`start_worker`, unless
``BATCH_WORKER`` is false or the app is testing) that processes pending items until
none is left, then waits ``BATCH_POLL_S`` seconds (or until a new batch arrives in
this worker).  An item's request goes through exactly the validation and report
builder of ``POST /v1/assessments`` (:func:`service.report.compute_report`); its
failure becomes the item's RFC 9457 problem document and does not stop the batch.
"""

from __future__ import annotations

import threading
from typing import Any

from flask import Flask
from marshmallow import ValidationError

from models.errors import EngineInputError

from . import batch_store, storage
from .errors import INVALID_INPUT, engine_field_to_pointer, flatten_messages
from .report import compute_report

WAKE_KEY = "emf_batch_wake"
_START_LOCK = threading.Lock()


def item_problem(exc: Exception, instance: str) -> dict[str, Any]:
    """The problem document of an item whose request could not be assessed (as the API would answer)."""
    if isinstance(exc, ValidationError):
        errors = list(flatten_messages(exc.messages))
        detail = f"The request has {len(errors)} invalid field(s); see errors."
    elif isinstance(exc, EngineInputError):
        errors, detail = [{"pointer": engine_field_to_pointer(exc.field), "detail": exc.message}], exc.message
    else:
        return {"type": "about:blank", "title": "Internal Server Error", "status": 500, "instance": instance,
                "detail": "The item could not be assessed because of an internal error (logged)."}
    return {"type": INVALID_INPUT, "title": "Invalid input", "status": 422, "detail": detail, "instance": instance,
            "errors": errors}


def summary(report: dict[str, Any]) -> dict[str, Any]:
    """The item's verdict, largest E and B and worst exposure index (over thresholds and load cases)."""
    indices = [c["exposure_index"] for c in report["compliance"]]
    cases = report.get("load_case_summary")
    indices += [g["exposure_index"] for g in (cases or {}).get("governing", [])]
    return {"verdict": (cases or report)["outcome"], "max_e_kv_m": report["maxima"]["e"]["value_kv_m"],
            "max_b_ut": report["maxima"]["b"]["value_ut"], "worst_exposure_index": max(indices)}


def process_one(app: Flask) -> bool:
    """Claim and end one item; False when there was nothing to claim."""
    import json

    make_session = storage.storage_of(app).sessionmaker
    with make_session() as session, session.begin():
        claim = batch_store.claim_next(session, lease_s=app.config["BATCH_LEASE_S"])
    if claim is None:
        return False
    instance = f"/v1/batches/{claim.batch_id}/items/{claim.position}"
    report = problem = None
    try:
        with app.app_context():
            report = compute_report(json.loads(claim.request_json), app.config)
    except (ValidationError, EngineInputError, ValueError) as exc:
        problem = item_problem(exc, instance)
    except Exception as exc:  # one item's failure must not stop the batch
        app.logger.exception("batch item %s failed", instance)
        problem = item_problem(exc, instance)
    with make_session() as session, session.begin():
        if report is not None:
            batch_store.finish_item(session, claim, report=report,
                                    canonical_request=storage.canonical_json(report["input"]), summary=summary(report))
        else:
            batch_store.finish_item(session, claim, problem=problem)
    return True


def process_pending(app: Flask, limit: int | None = None) -> int:
    """Process items until none is pending (or ``limit`` were processed); the number processed."""
    n = 0
    while (limit is None or n < limit) and process_one(app):
        n += 1
    return n


def wake(app: Flask) -> None:
    """Tell this worker's batch thread that items are waiting (starting it on first use)."""
    if not app.config["BATCH_WORKER"] or app.testing:
        return
    with _START_LOCK:
        if WAKE_KEY not in app.extensions:
            start_worker(app)
    app.extensions[WAKE_KEY].set()


def resume(app: Flask) -> None:
    """At start-up: start the batch thread when items are waiting (a restart in the middle of a batch)."""
    with storage.storage_of(app).sessionmaker() as session, session.begin():
        waiting = batch_store.has_unfinished(session)
    if waiting:
        start_worker(app)


def start_worker(app: Flask) -> threading.Thread:
    """Start this process's batch thread (a daemon: it ends with the worker)."""
    event = app.extensions[WAKE_KEY] = threading.Event()

    def loop() -> None:
        while True:
            try:
                process_pending(app)
            except Exception:  # the database may be briefly unreachable; try again later
                app.logger.exception("batch processing failed; retrying")
            event.wait(app.config["BATCH_POLL_S"])
            event.clear()

    thread = threading.Thread(target=loop, name="emf-batches", daemon=True)
    thread.start()
    return thread
