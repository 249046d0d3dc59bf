"""The ``load_cases`` and ``load_case_summary`` members of a cross-section or route report.

Each load case is the request's cross-section under other loading
(:func:`models.load_cases.apply_loading`), evaluated at the same points and judged
against the same thresholds, with the same compliance bases (right-of-way edge levels
on the edge values).  The first entry, id ``"base"``, is the request as given, i.e.
the top-level results of the report.  The summary gives the outcome over every case
and, per threshold, the case with the largest exposure index (the governing case).
"""

from __future__ import annotations

import dataclasses
from typing import Any

import numpy as np

from models import catalogue
from models.compliance import evaluate_compliance
from models.geometry import CrossSection
from models.load_cases import apply_loading
from models.results import FieldResult
from models.units import t_to_ut, v_per_m_to_kv_per_m

from .schemas import AssessmentRequest

BASE_LABEL = "As requested"


def _loading(section: CrossSection | Any, scale: float) -> dict[str, Any]:
    return {"current_scale": scale,
            "currents_a": {c.id: c.current_a for c in section.circuits},
            "voltages_kv": {c.id: c.voltage_kv for c in section.circuits}}


def _points(result: FieldResult) -> list[dict[str, float]]:
    cols = (result.points_m[:, 0], result.points_m[:, 1], v_per_m_to_kv_per_m(result.e_rms_v_per_m),
            t_to_ut(result.b_rms_t))
    return [{"offset_m": o, "height_m": h, "e_kv_m": e, "b_ut": b}
            for o, h, e, b in zip(*(np.asarray(c, dtype=float).tolist() for c in cols))]


def _compact(row: dict[str, Any]) -> dict[str, Any]:
    keep = ("level_id", "quantity", "basis", "exposure_index", "passes", "max_kv_m", "max_ut")
    return {k: row[k] for k in keep if k in row}


def _entry(case_id: str, label: str, line: Any, scale: float, rows: list[dict[str, Any]],
           maxima: dict[str, Any], **fields: Any) -> dict[str, Any]:
    """One ``load_cases`` entry: loading, outcome, maxima, compact compliance, then ``fields``."""
    return {"id": case_id, "label": label, "loading": _loading(line, scale),
            "outcome": "pass" if all(r["passes"] for r in rows) else "fail",
            "maxima": maxima, "compliance": [_compact(r) for r in rows], **fields}


def load_case_blocks(request: AssessmentRequest, limits: list[catalogue.Threshold],
                     base_compliance: list[dict[str, Any]], base_result: FieldResult) -> tuple[list, dict]:
    """(``load_cases``, ``load_case_summary``) for a request with ``load_cases``.

    ``base_compliance`` and ``base_result`` are the report's own (the base case is not
    computed twice).

    :raise models.errors.EngineInputError: a load case the section cannot take (field
        ``load_cases[i]...``), or a case that puts an edge point inside a conductor.
    """
    from .assessment import COMPLIANCE_QUANTITY, _compliance_rows, _evaluate, edge_fields, maxima

    offsets = base_result.points_m[:, 0]
    lateral = offsets if request.profile is not None else None
    cases = [_entry("base", BASE_LABEL, request.cross_section, 1.0, base_compliance, maxima(base_result),
                    points=_points(base_result))]
    for i, case in enumerate(request.load_cases or ()):
        section = apply_loading(request.cross_section, currents_a=case.currents_a, voltages_kv=case.voltages_kv,
                                current_scale=case.current_scale, field=f"load_cases[{i}]")
        variant = dataclasses.replace(request, cross_section=section)
        result = _evaluate(variant, offsets, base_result.points_m[:, 1])
        checks = evaluate_compliance(result, limits, lateral_offset_m=lateral, quantity_kind=COMPLIANCE_QUANTITY)
        rows = _compliance_rows(checks, result, edge_fields(variant))
        cases.append(_entry(case.id, case.label or case.id, section, case.current_scale, rows, maxima(result),
                            points=_points(result)))
    return cases, _summary(cases, base_compliance)


def _summary(cases: list[dict[str, Any]], base_compliance: list[dict[str, Any]]) -> dict[str, Any]:
    """Outcome over every case, the failing ones, and per threshold the governing case."""
    governing = []
    for k, row in enumerate(base_compliance):
        worst = max(cases, key=lambda c: c["compliance"][k]["exposure_index"])
        entry = worst["compliance"][k]
        governing.append({"level_id": row["level_id"], "quantity": row["quantity"], "case_id": worst["id"],
                          "exposure_index": entry["exposure_index"], "passes": entry["passes"]})
    return {"outcome": "pass" if all(c["outcome"] == "pass" for c in cases) else "fail",
            "cases": len(cases), "failing_cases": [c["id"] for c in cases if c["outcome"] == "fail"],
            "governing": governing}


def _receptor_rows(res: Any) -> list[dict[str, Any]]:
    s = res.sets.get("receptors")
    if s is None:
        return []
    e, b = v_per_m_to_kv_per_m(s.field.e_rms_v_per_m), t_to_ut(s.field.b_rms_t)
    return [{"id": i, "name": n, "e_kv_m": float(ev), "b_ut": float(bv)}
            for i, n, ev, bv in zip(s.ids, s.names, np.asarray(e).tolist(), np.asarray(b).tolist())]


def route_load_case_blocks(request: Any, limits: list[catalogue.Threshold], base_compliance: list[dict[str, Any]],
                           base_res: Any, *, max_points: int | None = None) -> tuple[list, dict]:
    """(``load_cases``, ``load_case_summary``) of a route request with ``load_cases``.

    Every case is the route under other loading, evaluated on the same sets (exposure zones
    only for the base case) with the same thresholds and compliance bases.  A case gives its
    loading, outcome, maxima, compliance and the fields at the receptors (the point lists
    of the other sets are the base case's only).

    :raise models.errors.EngineInputError: a load case the route cannot take (field named).
    """
    from models.route.evaluate import evaluate_route

    from .route_assessment import _compliance, route_maxima

    sets = dataclasses.replace(request.evaluation, zones=None)
    cases = [_entry("base", BASE_LABEL, request.route, 1.0, base_compliance, route_maxima(base_res),
                    receptors=_receptor_rows(base_res))]
    for i, case in enumerate(request.load_cases or ()):
        route = apply_loading(request.route, currents_a=case.currents_a, voltages_kv=case.voltages_kv,
                              current_scale=case.current_scale, field=f"load_cases[{i}]")
        res = evaluate_route(route, request.frequency_hz, sets, crs=request.crs,
                             soil_resistivity_ohm_m=request.soil_resistivity_ohm_m, max_points=max_points)
        rows = _compliance(res, limits)
        cases.append(_entry(case.id, case.label or case.id, route, case.current_scale, rows, route_maxima(res),
                            receptors=_receptor_rows(res)))
    return cases, _summary(cases, base_compliance)
