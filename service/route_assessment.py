"""From a validated route request to a report (pure: no Flask, no database, no clock).

Same report frame as a cross-section (:func:`service.assessment.build_report`):
``title``, ``reference``, ``outcome``, versions, ``input``, ``maxima``,
``compliance``, ``assumptions``, ``cautions`` -- plus ``kind: "route"``, ``crs``,
``results`` (one member per evaluation set), ``zones`` (a GeoJSON
FeatureCollection in the request CRS) and, when the request gives one,
``right_of_way`` (largest E and B along each edge, where, exposure indices).  Field values are in presentation units
(kV/m, µT); 3-D components are along x (east), y (north) and z (up) of the working
metre plane.  Maxima and compliance run over every evaluated point of every set (the
right-of-way edge samples included), except that a level applying at the edge of
the right-of-way is judged on the edge samples when the request gives them;
compliance distances come from the lateral profile when one is requested.
"""

from __future__ import annotations

from typing import Any

import numpy as np

import models
from models import catalogue
from models.compliance import evaluate_compliance
from models.results import FieldResult
from models.route.evaluate import RouteResult, evaluate_route
from models.units import t_to_ut, v_per_m_to_kv_per_m

from .assessment import CAUTIONS, COMPLIANCE_QUANTITY, _phase_deg, basis_for, compliance_row, threshold_row, thresholds
from .route_schemas import RouteAssessmentRequest, route_request_to_plain

AXES = ("x", "y", "z")


def _columns(field: FieldResult) -> tuple[dict[str, np.ndarray], dict[str, np.ndarray]]:
    """Resultants/maxima/axial ratios and per-axis components [kV/m, µT, deg] of a 3-D result."""
    e, b = field.e_phasor_v_per_m, field.b_phasor_t
    main = {
        "e_kv_m": v_per_m_to_kv_per_m(field.e_rms_v_per_m),
        "b_ut": t_to_ut(field.b_rms_t),
        "e_max_kv_m": v_per_m_to_kv_per_m(field.e_max_v_per_m),
        "b_max_ut": t_to_ut(field.b_max_t),
        "e_axial_ratio": field.e_axial_ratio,
        "b_axial_ratio": field.b_axial_ratio,
    }
    comps: dict[str, np.ndarray] = {}
    for k, axis in enumerate(AXES):
        comps[f"e_{axis}_kv_m"] = v_per_m_to_kv_per_m(np.abs(e[:, k]))
        comps[f"e_{axis}_phase_deg"] = _phase_deg(e[:, k])
    for k, axis in enumerate(AXES):
        comps[f"b_{axis}_ut"] = t_to_ut(np.abs(b[:, k]))
        comps[f"b_{axis}_phase_deg"] = _phase_deg(b[:, k])
    return main, comps


def _rows(lead: dict[str, Any], field: FieldResult) -> list[dict[str, Any]]:
    """One dict per point: the ``lead`` columns (position, set-specific), then fields and components."""
    main, comps = _columns(field)
    lead_names = list(lead)
    lead_values = [v if isinstance(v, (list, tuple)) else np.asarray(v).tolist() for v in lead.values()]
    names = list(main)
    values = [np.asarray(v, dtype=float).tolist() for v in main.values()]
    cnames = list(comps)
    cvalues = [np.asarray(v, dtype=float).tolist() for v in comps.values()]
    rows = []
    for lrow, row, crow in zip(zip(*lead_values), zip(*values), zip(*cvalues)):
        item = dict(zip(lead_names, lrow))
        item.update(zip(names, row))
        item["components"] = dict(zip(cnames, crow))
        rows.append(item)
    return rows


def _grid_block(res: RouteResult) -> dict[str, Any]:
    s = res.sets["grid"]
    g = s.grid
    ny, nx = g.shape
    out: dict[str, Any] = {
        "nx": nx, "ny": ny, "height_m": g.height_m,
        "working_crs": res.frame.working_crs,
        "x_m": g.x_m.tolist(), "y_m": g.y_m.tolist(),
        "e_kv_m": v_per_m_to_kv_per_m(s.field.e_rms_v_per_m).reshape(ny, nx).tolist(),
        "b_ut": t_to_ut(s.field.b_rms_t).reshape(ny, nx).tolist(),
    }
    if res.frame.transforms:
        # axes are in the working plane; give every node's position in the request CRS too
        out["x"] = s.x.reshape(ny, nx).tolist()
        out["y"] = s.y.reshape(ny, nx).tolist()
    return out


def _edge_slices(s) -> dict[str, slice]:
    """Rows of each edge (left, right) in the right-of-way set."""
    n_left = len(s.edge_samples[0].distance_m)
    return {"left": slice(0, n_left), "right": slice(n_left, len(s.edges))}


def _edge_rows(s) -> dict[str, list[dict[str, Any]]]:
    z = s.field.points_m[:, 2]
    out = {}
    for edge, sl in _edge_slices(s).items():
        field = FieldResult(s.field.points_m[sl], s.field.frequency_hz, s.field.e_phasor_v_per_m[sl],
                            s.field.b_phasor_t[sl], s.field.assumptions)
        out[edge] = _rows({"edge": list(s.edges[sl]), "offset_m": s.offset_m[sl], "x": s.x[sl], "y": s.y[sl],
                           "distance_m": s.distance_m[sl], "chainage_m": s.chainage_m[sl], "height_m": z[sl]},
                          field)
    return out


def results_block(res: RouteResult) -> dict[str, Any]:
    """The ``results`` member: per-set point rows (path, lateral profile, receptors, right-of-way edges) and the grid."""
    out: dict[str, Any] = {}
    for kind, s in res.sets.items():
        z = s.field.points_m[:, 2]
        if kind == "right_of_way":
            out[kind] = _edge_rows(s)
        elif kind == "path":
            out[kind] = _rows({"x": s.x, "y": s.y, "distance_m": s.distance_m, "height_m": z}, s.field)
        elif kind == "lateral_profile":
            out[kind] = _rows({"offset_m": s.offset_m, "x": s.x, "y": s.y, "height_m": z}, s.field)
        elif kind == "receptors":
            out[kind] = _rows({"id": list(s.ids), "name": list(s.names), "x": s.x, "y": s.y, "height_m": z}, s.field)
        elif kind == "grid":
            out[kind] = _grid_block(res)
    return out


def _where(res: RouteResult, index: int) -> dict[str, Any]:
    """Location of a point of the combined result: set, index in the set, position, set-specific keys."""
    kind, i = res.locate(index)
    s = res.sets[kind]
    loc: dict[str, Any] = {"set": kind, "index": i, "x": float(s.x[i]), "y": float(s.y[i]),
                           "height_m": float(s.field.points_m[i, 2])}
    if s.edges is not None:
        # index within the edge's rows of results.right_of_way[edge]
        loc["edge"] = s.edges[i]
        loc["index"] = i - _edge_slices(s)[s.edges[i]].start
        loc["chainage_m"] = float(s.chainage_m[i])
    if s.distance_m is not None:
        loc["distance_m"] = float(s.distance_m[i])
    if s.offset_m is not None:
        loc["offset_m"] = float(s.offset_m[i])
    if s.ids is not None:
        loc["id"], loc["name"] = s.ids[i], s.names[i]
    return loc


def route_maxima(res: RouteResult) -> dict[str, Any]:
    """Largest resultant E [kV/m] and B [µT] over all evaluated points, and where (first if tied)."""
    e = v_per_m_to_kv_per_m(res.combined.e_rms_v_per_m)
    b = t_to_ut(res.combined.b_rms_t)
    ke, kb = int(np.argmax(e)), int(np.argmax(b))
    return {"e": {"value_kv_m": float(e[ke]), **_where(res, ke)},
            "b": {"value_ut": float(b[kb]), **_where(res, kb)}}


def right_of_way_block(request: RouteAssessmentRequest, res: RouteResult,
                       limits: list[catalogue.Threshold]) -> dict[str, Any] | None:
    """Per edge: largest resultant E [kV/m] and B [µT] along it, where, and the exposure index per threshold.

    None when the request gives no right-of-way.  ``geometry`` is the edge polyline
    (vertices at the supports) in the request CRS.
    """
    spec = request.evaluation.right_of_way
    if spec is None:
        return None
    s = res.sets["right_of_way"]
    start = res.slices["right_of_way"].start
    edges = []
    for samples, (edge, sl) in zip(s.edge_samples, _edge_slices(s).items()):
        e_si, b_si = s.field.e_rms_v_per_m[sl], s.field.b_rms_t[sl]
        ke, kb = int(np.argmax(e_si)), int(np.argmax(b_si))
        values = {"E": e_si[ke], "B": b_si[kb]}  # resultants, as COMPLIANCE_QUANTITY
        exposure = []
        for t in limits:
            index = float(values[t.quantity] / t.limit_si)
            exposure.append({"level_id": t.level_id, "quantity": t.quantity, "exposure_index": index,
                             "passes": bool(index <= 1.0)})
        vx, vy = res.frame.to_request(samples.vertices_m[:, 0], samples.vertices_m[:, 1])
        edges.append({
            "edge": edge, "offset_m": float(samples.offset_m), "height_m": float(spec.height_m),
            "n_points": int(sl.stop - sl.start), "length_m": samples.length_m,
            "e_kv_m": float(v_per_m_to_kv_per_m(values["E"])), "b_ut": float(t_to_ut(values["B"])),
            "e_location": _edge_location(res, start + sl.start + ke),
            "b_location": _edge_location(res, start + sl.start + kb),
            "exposure": exposure,
            "geometry": {"type": "LineString", "coordinates": [[float(x), float(y)] for x, y in zip(vx, vy)]},
        })
    return {"left_m": spec.left_m, "right_m": spec.right_m, "step_m": spec.step_m, "height_m": spec.height_m,
            "note": (f"Edges sampled every {spec.step_m:g} m along their whole length at {spec.height_m:g} m above "
                     "ground; the values are the largest along each edge."),
            "edges": edges}


def _edge_location(res: RouteResult, index: int) -> dict[str, Any]:
    loc = _where(res, index)
    return {k: loc[k] for k in ("index", "x", "y", "chainage_m", "distance_m")}


def _compliance(res: RouteResult, limits: list[catalogue.Threshold]) -> list[dict[str, Any]]:
    checks = evaluate_compliance(res.combined, limits, quantity_kind=COMPLIANCE_QUANTITY)
    edges_evaluated = "right_of_way" in res.sets
    edge_checks = None
    if edges_evaluated:
        edge_checks = evaluate_compliance(res.sets["right_of_way"].field, limits, quantity_kind=COMPLIANCE_QUANTITY)
    edge_start = res.slices["right_of_way"].start if edges_evaluated else 0
    lateral = None
    if "lateral_profile" in res.sets:
        lp = res.sets["lateral_profile"]
        lateral = evaluate_compliance(lp.field, limits, lateral_offset_m=lp.offset_m,
                                      quantity_kind=COMPLIANCE_QUANTITY)
    rows = []
    for k, c in enumerate(checks):
        basis = basis_for(c.threshold, edges_evaluated)
        index = c.max_index
        if basis == "right_of_way_edges":
            # judged where the level applies: on the edge samples only
            c = edge_checks[k]
            index = edge_start + c.max_index
        # compliance_row reads (offset, height) columns: give it (x, z) and replace the location below
        row = compliance_row(c, res.combined.points_m[:, [0, 2]] if basis != "right_of_way_edges"
                             else res.sets["right_of_way"].field.points_m[:, [0, 2]], basis)
        row.pop("max_offset_m", None)
        row.pop("max_height_m", None)
        row["max_location"] = _where(res, index)
        if lateral is not None:
            row["distance_left_m"] = lateral[k].distance_left_m
            row["distance_right_m"] = lateral[k].distance_right_m
            row["distance_note"] = ("from the lateral profile" + (f"; {lateral[k].distance_note}"
                                                                  if lateral[k].distance_note else ""))
        else:
            row["distance_note"] = "no lateral profile requested; see the zone widths"
        rows.append(row)
    return rows


def _zones_block(res: RouteResult) -> dict[str, Any] | None:
    """Zones FeatureCollection with presentation-unit limits added to each feature's properties."""
    if res.zones is None:
        return None
    features = []
    for feat, t in zip(res.zones["features"], res.zone_thresholds):
        props = dict(feat["properties"])
        props.update({k: v for k, v in threshold_row(t).items() if k.startswith("limit_") or k == "unit"})
        features.append({**feat, "properties": props})
    return {"type": "FeatureCollection", "features": features}


def build_route_report(request: RouteAssessmentRequest, *, max_points: int | None = None) -> dict[str, Any]:
    """Compute the report for a validated route request.

    Parameters
    ----------
    request : RouteAssessmentRequest
    max_points : int, optional
        Cap on observation points over all sets (the service passes ``MAX_ROUTE_POINTS``);
        checked exactly after the CRS transformation (the schema checks an estimate).

    Returns
    -------
    dict
        ``kind`` ("route"), ``title``, ``reference``, ``outcome``, ``engine_version``,
        ``catalogue_version``, ``frequency_hz``, ``compliance_quantity``, ``input``,
        ``crs``, ``results``, ``zones``, ``maxima``, ``compliance``, ``segment_counts``,
        ``assumptions``, ``cautions``, ``right_of_way`` (:func:`right_of_way_block`)
        when the request gives one, and ``load_cases`` with ``load_case_summary`` when it
        gives load cases (:func:`service.load_case_report.route_load_case_blocks`).

    Raises
    ------
    models.errors.EngineInputError
        Physically impossible input, bad CRS or unknown reference level (field named).
    """
    limits = thresholds(request)
    res = evaluate_route(request.route, request.frequency_hz, request.evaluation, crs=request.crs,
                         soil_resistivity_ohm_m=request.soil_resistivity_ohm_m, max_points=max_points)
    compliance = _compliance(res, limits)
    report = {
        "kind": "route",
        "title": request.title,
        "reference": request.reference,
        "outcome": "pass" if all(c["passes"] for c in compliance) else "fail",
        "engine_version": models.ENGINE_VERSION,
        "catalogue_version": catalogue.CATALOGUE_VERSION,
        "frequency_hz": res.frequency_hz,
        "compliance_quantity": COMPLIANCE_QUANTITY,
        "input": route_request_to_plain(request),
        "crs": {"request": res.frame.request_crs, "working": res.frame.working_crs,
                "geographic": res.frame.geographic},
        "results": results_block(res),
        "zones": _zones_block(res),
        "maxima": route_maxima(res),
        "compliance": compliance,
        "segment_counts": res.segment_counts,
        "assumptions": list(res.assumptions),
        "cautions": list(CAUTIONS),
    }
    edges = right_of_way_block(request, res, limits)
    if edges is not None:
        report["right_of_way"] = edges
    if request.load_cases:
        from .load_case_report import route_load_case_blocks

        report["load_cases"], report["load_case_summary"] = route_load_case_blocks(
            request, limits, compliance, res, max_points=max_points)
    return report
