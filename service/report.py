"""From a validated request to a report, for both geometries (pure: no Flask, no database, no clock).

One builder: the request's geometry chooses its evaluator and how its points are
located (:data:`service.section_report.SECTION` or :data:`service.route_report.ROUTE`,
a :class:`GeometryView`); everything else -- thresholds, judging
(:func:`models.judging.judge`), maxima, compliance rows, right-of-way edge values,
load cases and their summary, cautions -- is built once here.  The report is what the
API returns and stores; values are in presentation units (kV/m, µT,
:mod:`service.tables`).
"""

from __future__ import annotations

from collections.abc import Mapping
from typing import Any, Protocol

import numpy as np

import models
from models import catalogue
from models.evaluation import Evaluation
from models.judging import BASIS_NOTES, COMPLIANCE_QUANTITY, EdgeMaximum, Judgement, judge, with_distances
from models.judging import edge_maxima, governing_cases
from models.load_cases import evaluate_load_cases
from models.route import lowest_point
from models.units import t_to_ut, v_per_m_to_kv_per_m
from marshmallow import ValidationError

from .route_report import ROUTE
from .route_schemas import RouteAssessmentRequest, geometry_kind, load_route_request
from .schemas import AssessmentRequest, load_assessment_request
from .section_report import SECTION
from .harmonics_report import harmonics_block
from .study_report import check_study, study_block
from .tables import presentation, threshold_row

CAUTIONS: tuple[str, ...] = (
    "Computed values rest on the stated geometry and loading; they are only as good as those inputs "
    "(conductor heights at the point of lowest clearance, currents, voltages).",
    "Calculation is no substitute for measurement: verify fields on site following IEC 62110 or "
    "IEEE Std 644 where a decision depends on them.",
    "Implanted medical devices such as cardiac pacemakers and defibrillators can be affected at field "
    "levels below the reference levels (ICNIRP 2010 statement); the reference levels do not address "
    "such interference.",
    "Reference levels and limits differ between jurisdictions and are revised; defer to local codes, "
    "the regulator and a licensed engineer.",
)

MEMBER_ORDER = ("kind", "title", "reference", "outcome", "engine_version", "catalogue_version", "frequency_hz",
                "compliance_quantity", "input", "crs", "results", "zones", "maxima", "compliance", "segment_counts",
                "assumptions", "cautions", "points", "cable_screens", "right_of_way", "load_cases", "load_case_summary",
                "harmonics", "study")
"""Order of a report's members (each geometry has a subset)."""

BASE_LABEL = "As requested"
"""Label of the base load case (the request as given)."""

Request = AssessmentRequest | RouteAssessmentRequest


class GeometryView(Protocol):
    """What the report builder needs to know about one geometry."""

    geometry: str

    def check(self, request: Any) -> None:
        """Geometry checks that come before the thresholds are resolved."""

    def evaluate(self, request: Any, line: Any, *, bounds: Mapping[str, int] | None,
                 zones: bool = True) -> Evaluation:
        """The request's sets evaluated for ``line`` (the request's line or a load case of it), within ``bounds``."""

    def plain(self, request: Any) -> dict[str, Any]:
        """The normalised request (``input``)."""

    def members(self, request: Any, evaluation: Evaluation) -> dict[str, Any]:
        """The geometry's own report members (point tables, CRS, zones, ...)."""

    def location(self, evaluation: Evaluation, row: int) -> dict[str, Any]:
        """Where row ``row`` of ``evaluation.combined`` is, for ``maxima``."""

    def max_location(self, evaluation: Evaluation, row: int) -> tuple[dict[str, Any], dict[str, Any]]:
        """Where a compliance maximum is: members placed before ``exposure_index`` and at the end of the row."""

    def distance_note(self, judgement: Judgement) -> str:
        """The ``distance_note`` of a compliance row."""

    def edge_block(self, request: Any, evaluation: Evaluation, edges: list[EdgeMaximum],
                   exposure: list[list[dict[str, Any]]]) -> dict[str, Any]:
        """The ``right_of_way`` member from the edge maxima and their exposure rows."""

    def case_members(self, evaluation: Evaluation) -> dict[str, Any]:
        """What a load-case entry shows besides loading, outcome, maxima and compliance."""


def view_for(request: Request) -> GeometryView:
    """The geometry view of a request (the one place the geometry is chosen)."""
    return ROUTE if isinstance(request, RouteAssessmentRequest) else SECTION


def load_request(body: Any, limits: Mapping[str, Any]) -> Request:
    """Validate a request body of either geometry (``limits``: ``MAX_POINTS``, ``MAX_ROUTE_POINTS``,
    ``MAX_GRID_POINTS``, ``MAX_CONDUCTORS``).

    :raise marshmallow.ValidationError: per-field messages (422).
    """
    if geometry_kind(body) == "route":
        return load_route_request(body, max_route_points=limits["MAX_ROUTE_POINTS"],
                                  max_grid_points=limits["MAX_GRID_POINTS"], max_conductors=limits["MAX_CONDUCTORS"])
    return load_assessment_request(body, max_points=limits["MAX_POINTS"], max_conductors=limits["MAX_CONDUCTORS"])


def compute_report(body: Any, limits: Mapping[str, Any]) -> dict[str, Any]:
    """Validate a request body and build its report (every POST and the verification share this).

    :raise marshmallow.ValidationError: per-field messages (422).
    :raise models.errors.EngineInputError: physically impossible input (422, field named).
    """
    request = load_request(body, limits)
    check_report_size(request, limits["MAX_REPORT_BYTES"])
    bounds = None
    if isinstance(request, RouteAssessmentRequest):
        bounds = {"max_points": limits["MAX_ROUTE_POINTS"], "max_segments": limits["MAX_SEGMENTS"],
                  "max_pairs": limits["MAX_SEGMENT_POINT_PAIRS"]}
    return build_report(request, bounds=bounds)


ROW_BYTES = {"points": 700, "grid": 100, "case": 150, "route": 900}
"""Upper bounds of the JSON text per point row [bytes]: a row with components (cross-section,
route set), a grid node, a load case's point row (measured 560, 43-85, 118 and 680-740)."""


def report_size_estimate(request: Request) -> int:
    """An upper estimate of the report's JSON size [bytes], from the request alone (before computing)."""
    counts = request.point_counts
    cases = len(request.load_cases or ())
    if isinstance(request, RouteAssessmentRequest):
        rows = sum(n for name, n in counts.items() if name != "grid")
        receptors = counts.get("receptors", 0)
        size = rows * ROW_BYTES["route"] + counts.get("grid", 0) * ROW_BYTES["grid"] + cases * receptors * 150
    else:
        size = counts["points"] * (ROW_BYTES["points"] + cases * ROW_BYTES["case"])
    return int(size) + 64 * 1024


def check_report_size(request: Request, max_bytes: int) -> None:
    """Refuse, before any computation, a request whose report would exceed ``max_bytes`` (``MAX_REPORT_BYTES``).

    :raise marshmallow.ValidationError: 422 naming the setting and the estimate.
    """
    estimate = report_size_estimate(request)
    if estimate > max_bytes:
        raise ValidationError(
            f"The report of this request would be about {estimate / 2**20:.0f} MiB, more than this service's "
            f"limit MAX_REPORT_BYTES ({max_bytes / 2**20:.0f} MiB); use fewer points (a coarser step or "
            "resolution), fewer evaluation sets or fewer load cases.", field_name="_schema")


def thresholds(request: Request) -> list[catalogue.Threshold]:
    """Catalogue thresholds then custom ones, at the request's frequency (catalogue errors name the field)."""
    out = catalogue.thresholds_for(list(request.reference_levels), request.frequency_hz, field="reference_levels")
    for i, c in enumerate(request.custom_limits):
        out.append(catalogue.custom_threshold(c.id, c.quantity, c.value, c.unit, request.frequency_hz,
                                              title=c.title, field=f"custom_limits[{i}]"))
    return out


def maxima(view: GeometryView, evaluation: Evaluation) -> dict[str, Any]:
    """Largest resultant E [kV/m] and B [µT] over every evaluated point, and where (first point if tied)."""
    every, rows = evaluation.everywhere(), evaluation.everywhere_rows()
    e, b = v_per_m_to_kv_per_m(every.e_rms_v_per_m), t_to_ut(every.b_rms_t)
    ke, kb = int(np.argmax(e)), int(np.argmax(b))
    return {"e": {"value_kv_m": float(e[ke]), **view.location(evaluation, int(rows[ke]))},
            "b": {"value_ut": float(b[kb]), **view.location(evaluation, int(rows[kb]))}}


def compliance_row(view: GeometryView, evaluation: Evaluation, judgement: Judgement) -> dict[str, Any]:
    """One compliance entry: the threshold plus maximum, margin, where, exposure index, verdict and distances."""
    c = with_distances(judgement)
    _, conv, suffix = presentation(c.threshold.quantity)
    inline, trailing = view.max_location(evaluation, judgement.row)
    return {
        **threshold_row(c.threshold),
        "basis": judgement.basis,
        "basis_note": BASIS_NOTES[judgement.basis],
        f"max_{suffix}": float(conv(c.max_value_si)),
        f"margin_{suffix}": float(conv(c.margin_si)),
        **inline,
        "exposure_index": float(c.exposure_index),
        "passes": bool(c.passes),
        "distance_left_m": c.distance_left_m,
        "distance_right_m": c.distance_right_m,
        "distance_note": view.distance_note(judgement),
        **trailing,
    }


def exposure_rows(edge: EdgeMaximum) -> list[dict[str, Any]]:
    """Exposure index and verdict of every threshold at one right-of-way edge."""
    return [{"level_id": t.level_id, "quantity": t.quantity, "exposure_index": index, "passes": bool(index <= 1.0)}
            for t, index in edge.exposure]


def _outcome(rows: list[dict[str, Any]]) -> str:
    return "pass" if all(r["passes"] for r in rows) else "fail"


def _case_entry(case_id: str, label: str, line: Any, scale: float, rows: list[dict[str, Any]],
                maxima_: dict[str, Any], extra: dict[str, Any], sag: dict[str, Any] | None = None) -> dict[str, Any]:
    keep = ("level_id", "quantity", "basis", "exposure_index", "passes", "max_kv_m", "max_ut")
    loading = {"current_scale": scale, "currents_a": {c.id: c.current_a for c in line.circuits},
               "voltages_kv": {c.id: c.voltage_kv for c in line.circuits}}
    return {"id": case_id, "label": label, "loading": {**loading, **(sag or {})},
            "outcome": _outcome(rows), "maxima": maxima_,
            "compliance": [{k: r[k] for k in keep if k in r} for r in rows], **extra}


def _circuit_sag_m(circuit: Any) -> float | None:
    """The circuit's mid-span sag when every conductor gives the same ``sag_m``; None otherwise
    (conductors given by tension and weight, whose sag differs from span to span, or unequal sags)."""
    if circuit.kind == "underground":
        return 0.0
    sags = {k.sag_m for k in circuit.conductors}
    if len(sags) != 1 or any(k.horizontal_tension_n is not None for k in circuit.conductors):
        return None
    return float(sags.pop())


def sag_members(line: Any, evaluation: Evaluation) -> dict[str, Any]:
    """A route case's sags and its lowest phase conductor (least clearance), for the case's ``loading``."""
    low = lowest_point(evaluation.route_m)
    return {"sag_m": {c.id: _circuit_sag_m(c) for c in line.circuits},
            "earth_wire_sag_m": [float(w.sag_m) for w in line.earth_wires],
            "lowest_conductor": None if low is None else {"height_m": low.height_m, "wire": low.wire,
                                                          "span": low.span}}


def load_case_blocks(view: GeometryView, request: Request, limits: list[catalogue.Threshold],
                     base: tuple[Evaluation, list[Judgement], list[dict[str, Any]]],
                     bounds: Mapping[str, int] | None) -> tuple[list, dict]:
    """(``load_cases``, ``load_case_summary``): every case on the same sets and thresholds as the base case.

    ``base`` is the report's own evaluation, judgements and compliance rows (the base
    case, id ``"base"``, is not computed twice).  A route's cases are evaluated without
    exposure zones.

    :raise models.errors.EngineInputError: a load case the line cannot take (field ``load_cases[i]...``).
    """
    base_ev, base_judgements, base_rows = base
    # a route whose cases change the sag: every entry (the hot base case too) states its sags and lowest conductor
    sags = base_ev.route_m is not None and any(case.changes_sag for case in request.load_cases)
    entries = [_case_entry("base", BASE_LABEL, request.line, 1.0, base_rows, maxima(view, base_ev),
                           view.case_members(base_ev), sag_members(request.line, base_ev) if sags else None)]
    judged = [("base", base_judgements)]
    evaluated = evaluate_load_cases(request.line, request.load_cases,
                                    lambda line: view.evaluate(request, line, bounds=bounds, zones=False))
    for case, line, ev in evaluated:
        judgements = judge(ev, limits)
        rows = [compliance_row(view, ev, j) for j in judgements]
        entries.append(_case_entry(case.id, case.label or case.id, line, case.current_scale, rows,
                                   maxima(view, ev), view.case_members(ev), sag_members(line, ev) if sags else None))
        judged.append((case.id, judgements))
    governing = [{"level_id": j.compliance.threshold.level_id, "quantity": j.compliance.threshold.quantity,
                  "case_id": case_id, "exposure_index": float(j.exposure_index), "passes": bool(j.passes)}
                 for case_id, j in governing_cases(judged)]
    summary = {"outcome": "pass" if all(e["outcome"] == "pass" for e in entries) else "fail",
               "cases": len(entries), "failing_cases": [e["id"] for e in entries if e["outcome"] == "fail"],
               "governing": governing}
    return entries, summary


def build_report(request: Request, *, bounds: Mapping[str, int] | None = None) -> dict[str, Any]:
    """Compute the report for a validated request of either geometry.

    Parameters
    ----------
    request : AssessmentRequest or RouteAssessmentRequest
    bounds : mapping, optional
        Route: work bounds passed to :func:`models.route.evaluate_route` (``max_points``
        over all sets, checked exactly after the CRS transformation; ``max_segments``;
        ``max_pairs``); the service passes ``MAX_ROUTE_POINTS``, ``MAX_SEGMENTS`` and
        ``MAX_SEGMENT_POINT_PAIRS``.

    Returns
    -------
    dict
        Members in :data:`MEMBER_ORDER`: ``kind`` ("cross_section" or "route"),
        ``title``, ``reference``, ``outcome`` ("pass" when every threshold is met),
        versions, ``frequency_hz``, ``compliance_quantity``, ``input`` (the normalised
        request), the geometry's members (cross-section: ``points``; route: ``crs``,
        ``results``, ``zones``, ``segment_counts``), ``maxima``, ``compliance``,
        ``assumptions``, ``cautions``, ``right_of_way`` when the request gives one, and
        ``load_cases`` with ``load_case_summary`` when it gives load cases, ``harmonics`` when a
        circuit gives harmonics (:mod:`service.harmonics_report`; a failed sum rule makes
        ``outcome`` "fail"), ``study``
        when it gives a study (:mod:`service.study_report`).

    Raises
    ------
    models.errors.EngineInputError
        Physically impossible input, bad CRS or unknown reference level (field named).
    """
    view = view_for(request)
    view.check(request)
    check_study(view.geometry, request)
    limits = thresholds(request)
    ev = view.evaluate(request, request.line, bounds=bounds)
    judgements = judge(ev, limits)
    compliance = [compliance_row(view, ev, j) for j in judgements]
    members = {
        "kind": view.geometry,
        "title": request.title,
        "reference": request.reference,
        "outcome": _outcome(compliance),
        "engine_version": models.ENGINE_VERSION,
        "catalogue_version": catalogue.CATALOGUE_VERSION,
        "frequency_hz": ev.frequency_hz,
        "compliance_quantity": COMPLIANCE_QUANTITY,
        "input": view.plain(request),
        "maxima": maxima(view, ev),
        "compliance": compliance,
        "assumptions": list(ev.assumptions),
        "cautions": list(CAUTIONS),
        **view.members(request, ev),
    }
    edges = edge_maxima(ev, limits)
    if edges is not None:
        members["right_of_way"] = view.edge_block(request, ev, edges, [exposure_rows(e) for e in edges])
    if request.load_cases:
        members["load_cases"], members["load_case_summary"] = load_case_blocks(
            view, request, limits, (ev, judgements, compliance), bounds)
    harmonics = harmonics_block(view, request, limits, ev, bounds)
    if harmonics is not None:
        members["harmonics"] = harmonics
        if harmonics["outcome"] == "fail":
            members["outcome"] = "fail"
    if request.study is not None:
        members["study"] = study_block(view.geometry, request, limits, ev)
    return {k: members[k] for k in MEMBER_ORDER if k in members}
