"""Routes of compliance batches (blueprint ``batches``; thin views).

* ``POST /v1/batches`` -- store a batch of scenarios (202, ``Location``); each item is
  assessed and stored as an ordinary assessment by the batch workers (:mod:`service.batches`).
* ``GET /v1/batches/{id}`` -- progress and the items with their verdicts, assessment
  links or problem documents.
* ``GET /v1/batches/{id}/summary`` -- the same as CSV (one row per item).
"""

from __future__ import annotations

import csv
import io
import uuid
from typing import Any

from flask import Blueprint, Response, current_app, jsonify, url_for
from marshmallow import Schema, ValidationError, fields, validate, validates_schema
from werkzeug.exceptions import NotFound

from . import batch_store, batches, storage
from .access import current_tenant
from .inputs import json_body
from .schema_fields import TEXT, check_unique

bp = Blueprint("batches", __name__)

SUMMARY_COLUMNS = ("position", "name", "status", "assessment_id", "verdict", "max_e_kv_m", "max_b_ut",
                   "worst_exposure_index", "problem")


class BatchItemSchema(Schema):
    name = fields.String(required=True, validate=TEXT)
    request = fields.Dict(required=True)  # validated when the item is processed: its errors are the item's


class BatchSchema(Schema):
    title = fields.String(load_default="", validate=validate.Length(max=200))
    items = fields.List(fields.Nested(BatchItemSchema), required=True)

    def __init__(self, *, max_items: int = 500, **kwargs: Any):
        super().__init__(**kwargs)
        self.max_items = max_items

    @validates_schema
    def size_and_names(self, data: dict[str, Any], **kwargs: Any) -> None:
        n = len(data["items"])
        if not 1 <= n <= self.max_items:
            raise ValidationError(f"Give 1 to {self.max_items} items (MAX_BATCH_ITEMS); instead received {n}.",
                                  field_name="items")
        check_unique([i["name"] for i in data["items"]], lambda i: ("items", i, "name"), "item name")


def _status(items: list[batch_store.BatchItem]) -> tuple[str, dict[str, int]]:
    counts = {s: sum(1 for i in items if i.status == s) for s in batch_store.STATUSES}
    if counts["pending"] + counts["running"] == 0:
        return "done", counts
    return ("pending" if counts["pending"] == len(items) else "running"), counts


def _item(item: batch_store.BatchItem) -> dict[str, Any]:
    return {"position": item.position, "name": item.name, "status": item.status,
            "assessment_id": str(item.assessment_id) if item.assessment_id else None,
            "url": url_for("api.get_assessment", assessment_id=item.assessment_id) if item.assessment_id else None,
            "verdict": item.verdict, "max_e_kv_m": item.max_e_kv_m, "max_b_ut": item.max_b_ut,
            "worst_exposure_index": item.worst_exposure_index, "problem": item.problem()}


def _batch(batch_id: uuid.UUID) -> tuple[batch_store.BatchRecord, list[batch_store.BatchItem]]:
    session = storage.get_session()
    with session.begin():
        batch = batch_store.get_batch(session, batch_id)
        if batch is None:
            raise NotFound(f"No batch with id {batch_id}.")
        return batch, batch_store.batch_items(session, batch_id)


def _document(batch: batch_store.BatchRecord, items: list[batch_store.BatchItem]) -> dict[str, Any]:
    status, counts = _status(items)
    return {"id": str(batch.id), "created_at": storage.rfc3339(batch.created_at), "title": batch.title,
            "status": status, "counts": counts, "item_count": batch.item_count,
            "summary_url": url_for("batches.get_summary", batch_id=batch.id),
            "items": [_item(i) for i in items]}


@bp.post("/v1/batches")
def create_batch() -> tuple[Response, int, dict[str, str]]:
    """Store a batch; its items are assessed in the background."""
    data = BatchSchema(max_items=current_app.config["MAX_BATCH_ITEMS"]).load(json_body())
    session = storage.get_session()
    with session.begin():
        batch = batch_store.create_batch(session, data["title"], [(i["name"], i["request"]) for i in data["items"]],
                                         tenant=current_tenant())
        document = _document(batch, batch_store.batch_items(session, batch.id))
    batches.wake(current_app._get_current_object())
    return jsonify(document), 202, {"Location": url_for("batches.get_batch", batch_id=batch.id)}


@bp.get("/v1/batches/<uuid:batch_id>")
def get_batch(batch_id: uuid.UUID) -> Response:
    """Progress of a batch and its items."""
    return jsonify(_document(*_batch(batch_id)))


@bp.get("/v1/batches/<uuid:batch_id>/summary")
def get_summary(batch_id: uuid.UUID) -> Response:
    """One CSV row per item: status, assessment id, verdict, largest E and B, worst exposure index, problem."""
    _, items = _batch(batch_id)
    out = io.StringIO()
    writer = csv.writer(out, lineterminator="\r\n")
    writer.writerow(SUMMARY_COLUMNS)
    for i in items:
        problem = i.problem()
        writer.writerow([i.position, i.name, i.status, i.assessment_id or "", i.verdict or "",
                         "" if i.max_e_kv_m is None else repr(i.max_e_kv_m),
                         "" if i.max_b_ut is None else repr(i.max_b_ut),
                         "" if i.worst_exposure_index is None else repr(i.worst_exposure_index),
                         "" if problem is None else "; ".join([problem.get("detail", "")] + [
                             f"{e['pointer']}: {e['detail']}" for e in problem.get("errors", [])])])
    response = Response(out.getvalue(), mimetype="text/csv")
    response.headers["Content-Disposition"] = f'attachment; filename="batch-{batch_id}.csv"'
    return response
