"""From a validated request to a report (pure: no Flask, no database, no clock).

The report is what the API returns and stores.  SI values from the engine are
converted to presentation units here: E in kV/m (``*_kv_m``), B in µT (``*_ut``).
``e_kv_m``/``b_ut`` are resultants (root-sum-square of the component rms values,
the usual measurement and compliance quantity); ``e_max_kv_m``/``b_max_ut`` are the
semi-major axes of the polarisation ellipses.
"""

from __future__ import annotations

import dataclasses

from typing import Any

import numpy as np

import models
from models import catalogue
from models.compliance import ThresholdCompliance, evaluate_compliance
from models.cross_section import evaluate_cross_section
from models.errors import EngineInputError
from models.results import FieldResult
from models.sources import validate_cross_section
from models.units import t_to_ut, v_per_m_to_kv_per_m

from .schemas import AssessmentRequest, profile_point_count, to_plain

COMPLIANCE_QUANTITY = "resultant"

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


def evaluation_points(request: AssessmentRequest) -> tuple[np.ndarray, np.ndarray]:
    """Offsets and heights [m] of the points to evaluate, in report order.

    A profile gives ``from_m + k * step_m`` up to ``to_m``, with ``to_m`` appended when
    the steps do not land on it (see :func:`service.schemas.profile_point_count`).
    """
    if request.profile is not None:
        p = request.profile
        n = int(profile_point_count(p.from_m, p.to_m, p.step_m))
        # Rounded to 1 nm so that 0.1 m steps print as 0.1, not 0.30000000000000004.
        offsets = np.round(p.from_m + p.step_m * np.arange(n, dtype=float), 9)
        offsets[-1] = p.to_m
        return offsets, np.full(n, p.height_m)
    assert request.points is not None
    return (np.array([pt.offset_m for pt in request.points], dtype=float),
            np.array([pt.height_m for pt in request.points], dtype=float))


def thresholds(request: AssessmentRequest) -> list[catalogue.Threshold]:
    """Catalogue thresholds then custom ones, at the request's frequency (catalogue errors name the field)."""
    out = catalogue.thresholds_for(list(request.reference_levels), request.frequency_hz, field="reference_levels")
    for i, c in enumerate(request.custom_limits):
        out.append(catalogue.custom_threshold(c.id, c.quantity, c.value, c.unit, request.frequency_hz,
                                              title=c.title, field=f"custom_limits[{i}]"))
    return out


def _phase_deg(phasor: np.ndarray) -> np.ndarray:
    return np.where(np.abs(phasor) > 0, np.angle(phasor, deg=True), 0.0)


def point_rows(result: FieldResult) -> list[dict[str, Any]]:
    """One dict per point: position, resultants, ellipse maxima, axial ratios, components."""
    e, b = result.e_phasor_v_per_m, result.b_phasor_t
    cols = {
        "offset_m": result.points_m[:, 0],
        "height_m": result.points_m[:, 1],
        "e_kv_m": v_per_m_to_kv_per_m(result.e_rms_v_per_m),
        "b_ut": t_to_ut(result.b_rms_t),
        "e_max_kv_m": v_per_m_to_kv_per_m(result.e_max_v_per_m),
        "b_max_ut": t_to_ut(result.b_max_t),
        "e_axial_ratio": result.e_axial_ratio,
        "b_axial_ratio": result.b_axial_ratio,
    }
    comps = {
        "e_horizontal_kv_m": v_per_m_to_kv_per_m(np.abs(e[:, 0])),
        "e_horizontal_phase_deg": _phase_deg(e[:, 0]),
        "e_vertical_kv_m": v_per_m_to_kv_per_m(np.abs(e[:, 1])),
        "e_vertical_phase_deg": _phase_deg(e[:, 1]),
        "b_horizontal_ut": t_to_ut(np.abs(b[:, 0])),
        "b_horizontal_phase_deg": _phase_deg(b[:, 0]),
        "b_vertical_ut": t_to_ut(np.abs(b[:, 1])),
        "b_vertical_phase_deg": _phase_deg(b[:, 1]),
    }
    names, values = list(cols), [np.asarray(v, dtype=float).tolist() for v in cols.values()]
    cnames, cvalues = list(comps), [np.asarray(v, dtype=float).tolist() for v in comps.values()]
    rows = []
    for row, crow in zip(zip(*values), zip(*cvalues)):
        item = dict(zip(names, row))
        item["components"] = dict(zip(cnames, crow))
        rows.append(item)
    return rows


def _maximum(values: np.ndarray, points_m: np.ndarray, name: str) -> dict[str, Any]:
    k = int(np.argmax(values))
    return {name: float(values[k]), "offset_m": float(points_m[k, 0]), "height_m": float(points_m[k, 1]),
            "point_index": k}


def maxima(result: FieldResult) -> dict[str, Any]:
    """Largest resultant E [kV/m] and B [µT] and where they occur (first point if tied)."""
    return {"e": _maximum(v_per_m_to_kv_per_m(result.e_rms_v_per_m), result.points_m, "value_kv_m"),
            "b": _maximum(t_to_ut(result.b_rms_t), result.points_m, "value_ut")}


def _presentation(quantity: str) -> tuple[str, Any, str]:
    """(unit, converter from SI, name suffix) for a quantity."""
    if quantity == "E":
        return "kV/m", v_per_m_to_kv_per_m, "kv_m"
    return "µT", t_to_ut, "ut"


def threshold_row(t: catalogue.Threshold) -> dict[str, Any]:
    """A threshold in presentation units (``limit_kv_m`` for E, ``limit_ut`` for B)."""
    unit, conv, suffix = _presentation(t.quantity)
    return {
        "level_id": t.level_id,
        "title": t.title,
        "citation": t.citation,
        "population": t.population,
        "status": t.status,
        "note": t.note,
        "applies_at": t.applies_at,
        "quantity": t.quantity,
        "frequency_hz": t.frequency_hz,
        "unit": unit,
        f"limit_{suffix}": float(conv(t.limit_si)),
    }


BASIS_NOTES = {
    "all_points": "Compared with the maximum over every evaluated point.",
    "right_of_way_edges": "This level applies at the edge of the right-of-way: compared with the largest value "
                          "computed on the right-of-way edges (for a cross-section, the two edge offsets; for a "
                          "route, every sample along both edges).",
    "all_points_conservative": "This level applies at the edge of the right-of-way, but no right-of-way edge was "
                               "evaluated: compared with the maximum over every evaluated point, which can only "
                               "overstate the edge value. Give right_of_way (cross-section or route) to compare "
                               "at the edges.",
}
"""What each compliance ``basis`` means (``basis_note`` of a compliance row)."""


def basis_for(t: catalogue.Threshold, edges_evaluated: bool) -> str:
    """The compliance basis of a threshold: where its maximum is taken (:data:`BASIS_NOTES`)."""
    if t.applies_at != "right_of_way_edge":
        return "all_points"
    return "right_of_way_edges" if edges_evaluated else "all_points_conservative"


def compliance_row(c: ThresholdCompliance, points_m: np.ndarray, basis: str = "all_points") -> dict[str, Any]:
    """One compliance entry: the threshold plus maximum, margin, exposure index and distances.

    ``points_m`` holds the (offset, height) of the points ``c.max_index`` refers to;
    ``basis`` says which points those are (:data:`BASIS_NOTES`).
    """
    _, conv, suffix = _presentation(c.threshold.quantity)
    return {
        **threshold_row(c.threshold),
        "basis": basis,
        "basis_note": BASIS_NOTES[basis],
        f"max_{suffix}": float(conv(c.max_value_si)),
        f"margin_{suffix}": float(conv(c.margin_si)),
        "max_offset_m": float(points_m[c.max_index, 0]),
        "max_height_m": float(points_m[c.max_index, 1]),
        "exposure_index": float(c.exposure_index),
        "passes": bool(c.passes),
        "distance_left_m": c.distance_left_m,
        "distance_right_m": c.distance_right_m,
        "distance_note": c.distance_note,
    }


def _evaluate(request: AssessmentRequest, offsets: np.ndarray, heights: np.ndarray) -> FieldResult:
    try:
        return evaluate_cross_section(request.cross_section, offsets, heights, request.frequency_hz,
                                      soil_resistivity_ohm_m=request.soil_resistivity_ohm_m)
    except EngineInputError as exc:
        if request.profile is not None and exc.field.startswith("points["):
            raise type(exc)("profile", f"{exc.message} (a point of the requested profile)") from exc
        raise


DEFAULT_EDGE_HEIGHT_M = 1.0
"""Height [m] of the right-of-way edge values when explicit points lie at several heights (common practice: 1 m)."""


def edge_height(request: AssessmentRequest) -> tuple[float, str]:
    """Height [m] at which the right-of-way edges are evaluated, and its basis.

    The profile's ``height_m``; for explicit points their height if they all share
    one, else :data:`DEFAULT_EDGE_HEIGHT_M`.  Basis: "profile", "points" or "default".
    """
    if request.profile is not None:
        return request.profile.height_m, "profile"
    heights = {pt.height_m for pt in request.points or ()}
    if len(heights) == 1:
        return heights.pop(), "points"
    return DEFAULT_EDGE_HEIGHT_M, "default"


_HEIGHT_NOTES = {
    "profile": "Edges evaluated at the height of the lateral profile.",
    "points": "Edges evaluated at the common height of the given points.",
    "default": "The given points lie at several heights; edges evaluated at the default 1 m above ground.",
}


def edge_fields(request: AssessmentRequest) -> FieldResult | None:
    """Fields at the two right-of-way edges (left, right) at :func:`edge_height`; None without one.

    The fields are evaluated at exactly the edge offsets (not interpolated from the profile).

    :raise models.errors.EngineInputError: an edge inside a conductor (field ``right_of_way.<edge>_m``).
    """
    row = request.right_of_way
    if row is None:
        return None
    height_m, _ = edge_height(request)
    keys = ("left_m", "right_m")
    try:
        return evaluate_cross_section(request.cross_section, np.array([row.left_m, row.right_m]),
                                      np.full(2, height_m), request.frequency_hz,
                                      soil_resistivity_ohm_m=request.soil_resistivity_ohm_m)
    except EngineInputError as exc:
        if exc.field.startswith("points["):
            k = int(exc.field[len("points["):].split("]", 1)[0])
            raise type(exc)(f"right_of_way.{keys[k]}", f"{exc.message} (the right-of-way edge point)") from exc
        raise


def right_of_way_block(request: AssessmentRequest, limits: list[catalogue.Threshold],
                       result: FieldResult | None = None) -> dict[str, Any] | None:
    """Resultant E [kV/m] and B [µT] computed at the two right-of-way edges, with exposure indices.

    ``result`` is :func:`edge_fields` (computed here when omitted).  None without a right-of-way.

    :raise models.errors.EngineInputError: an edge inside a conductor (field ``right_of_way.<edge>_m``).
    """
    row = request.right_of_way
    if row is None:
        return None
    height_m, basis = edge_height(request)
    if result is None:
        result = edge_fields(request)
    keys = ("left_m", "right_m")
    values = {"E": result.e_rms_v_per_m, "B": result.b_rms_t}  # resultants, as COMPLIANCE_QUANTITY
    edges = []
    for k, (edge, key) in enumerate(zip(("left", "right"), keys)):
        exposure = []
        for t in limits:
            index = float(values[t.quantity][k] / t.limit_si)
            exposure.append({"level_id": t.level_id, "quantity": t.quantity, "exposure_index": index,
                             "passes": bool(index <= 1.0)})
        edges.append({"edge": edge, "offset_m": float(getattr(row, key)), "height_m": float(height_m),
                      "e_kv_m": float(v_per_m_to_kv_per_m(result.e_rms_v_per_m[k])),
                      "b_ut": float(t_to_ut(result.b_rms_t[k])), "exposure": exposure})
    return {"left_m": row.left_m, "right_m": row.right_m, "height_m": float(height_m), "height_basis": basis,
            "note": _HEIGHT_NOTES[basis], "edges": edges}


def _compliance_rows(checks: list[ThresholdCompliance], result: FieldResult,
                     edge_result: FieldResult | None) -> list[dict[str, Any]]:
    """Compliance rows; a level that applies at the right-of-way edge is judged on the edge values.

    Its compliance distances still come from the whole profile (where the field falls
    below the limit), only the maximum, margin, exposure index and verdict change.
    """
    rows = []
    for c in checks:
        basis = basis_for(c.threshold, edge_result is not None)
        if basis != "right_of_way_edges":
            rows.append(compliance_row(c, result.points_m, basis))
            continue
        at_edges = evaluate_compliance(edge_result, [c.threshold], quantity_kind=COMPLIANCE_QUANTITY)[0]
        merged = dataclasses.replace(at_edges, distance_left_m=c.distance_left_m,
                                     distance_right_m=c.distance_right_m, distance_note=c.distance_note)
        rows.append(compliance_row(merged, edge_result.points_m, basis))
    return rows


def build_report(request: AssessmentRequest) -> dict[str, Any]:
    """Compute the report for a validated request.

    Returns
    -------
    dict
        ``kind`` ("cross_section"), ``title``, ``reference``, ``outcome`` ("pass" when
        every threshold is met),
        ``engine_version``, ``catalogue_version``, ``frequency_hz``,
        ``compliance_quantity``, ``input`` (the normalised request), ``maxima``,
        ``compliance``, ``assumptions``, ``cautions``, ``points``, ``right_of_way``
        (see :func:`right_of_way_block`) when the request gives one, and ``load_cases``
        with ``load_case_summary`` when it gives load cases
        (:func:`service.load_case_report.load_case_blocks`).

    Raises
    ------
    models.errors.EngineInputError
        Physically impossible input or unknown reference level (field named).
    """
    validate_cross_section(request.cross_section, request.frequency_hz)  # geometry and frequency first
    limits = thresholds(request)
    offsets, heights = evaluation_points(request)
    result = _evaluate(request, offsets, heights)
    lateral = offsets if request.profile is not None else None
    checks = evaluate_compliance(result, limits, lateral_offset_m=lateral, quantity_kind=COMPLIANCE_QUANTITY)
    edge_result = edge_fields(request)
    compliance = _compliance_rows(checks, result, edge_result)
    edges = right_of_way_block(request, limits, edge_result)
    report = {
        "kind": "cross_section",
        "title": request.title,
        "reference": request.reference,
        "outcome": "pass" if all(c["passes"] for c in compliance) else "fail",
        "engine_version": models.ENGINE_VERSION,
        "catalogue_version": catalogue.CATALOGUE_VERSION,
        "frequency_hz": request.frequency_hz,
        "compliance_quantity": COMPLIANCE_QUANTITY,
        "input": to_plain(request),
        "maxima": maxima(result),
        "compliance": compliance,
        "assumptions": list(result.assumptions),
        "cautions": list(CAUTIONS),
        "points": point_rows(result),
    }
    if edges is not None:
        report["right_of_way"] = edges
    if request.load_cases:
        from .load_case_report import load_case_blocks

        report["load_cases"], report["load_case_summary"] = load_case_blocks(request, limits, compliance, result)
    return report
