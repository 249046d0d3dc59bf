"""How a route's evaluation appears in a report (:class:`service.report.GeometryView`).

A route report has, besides the common members, ``crs``, ``results`` (one member
per evaluation set), ``zones`` (a GeoJSON FeatureCollection in the request CRS) and
``segment_counts``.  Points are located by set, index and position in the request
CRS; 3-D components are along x (east), y (north) and z (up) of the working metre
plane (:data:`service.tables.ROUTE_AXES`).  Compliance distances come from the
lateral profile when one is requested.
"""

from __future__ import annotations

import dataclasses
from collections.abc import Mapping
from typing import Any

from models.evaluation import Evaluation, EvaluationSet, sub_result
from models.judging import EdgeMaximum, Judgement
from models.route.evaluate import evaluate_route
from models.units import t_to_ut, v_per_m_to_kv_per_m

from .route_schemas import RouteAssessmentRequest, route_request_to_plain
from .tables import ROUTE_AXES, point_rows, resultant_rows, threshold_row


def _grid_block(ev: Evaluation) -> dict[str, Any]:
    s = ev.sets["grid"]
    g = s.grid
    ny, nx = g.shape
    out: dict[str, Any] = {
        "nx": nx, "ny": ny, "height_m": g.height_m,
        "working_crs": ev.frame.working_crs,
        "x_m": g.x_m.tolist(), "y_m": g.y_m.tolist(),
        "e_kv_m": v_per_m_to_kv_per_m(s.field.e_rms_v_per_m).reshape(ny, nx).tolist(),
        "b_ut": t_to_ut(s.field.b_rms_t).reshape(ny, nx).tolist(),
    }
    if ev.frame.transforms:
        # axes are in the working plane; give every node's position in the request CRS too
        out["x"] = s.x.reshape(ny, nx).tolist()
        out["y"] = s.y.reshape(ny, nx).tolist()
    return out


def _set_lead(s: EvaluationSet, rows: slice = slice(None)) -> dict[str, Any]:
    """The location columns of a set's point rows (before the field columns)."""
    z = s.field.points_m[rows, 2]
    if s.role == "right_of_way":
        return {"edge": list(s.edges[rows]), "offset_m": s.offset_m[rows], "x": s.x[rows], "y": s.y[rows],
                "distance_m": s.distance_m[rows], "chainage_m": s.chainage_m[rows], "height_m": z}
    if s.role == "path":
        return {"x": s.x, "y": s.y, "distance_m": s.distance_m, "height_m": z}
    if s.role == "lateral_profile":
        return {"offset_m": s.offset_m, "x": s.x, "y": s.y, "height_m": z}
    return {"id": list(s.ids), "name": list(s.names), "x": s.x, "y": s.y, "height_m": z}


def results_block(ev: Evaluation) -> dict[str, Any]:
    """The ``results`` member: per-set point rows (right-of-way rows per edge) and the grid."""
    out: dict[str, Any] = {}
    for name, s in ev.sets.items():
        if s.role == "grid":
            out[name] = _grid_block(ev)
        elif s.role == "right_of_way":
            out[name] = {edge: point_rows(_set_lead(s, sl), sub_result(s.field, sl), ROUTE_AXES)
                         for edge, sl in s.edge_rows().items()}
        else:
            out[name] = point_rows(_set_lead(s), s.field, ROUTE_AXES)
    return out


def where(ev: Evaluation, row: int) -> dict[str, Any]:
    """Location of a row of the combined result: set, index in the set, position, set-specific keys."""
    name, i = ev.locate(row)
    s = ev.sets[name]
    loc: dict[str, Any] = {"set": name, "index": i, "x": float(s.x[i]), "y": float(s.y[i]),
                           "height_m": float(s.field.points_m[i, 2])}
    if s.edges is not None:
        # index within the edge's rows of results.right_of_way[edge]
        loc["edge"] = s.edges[i]
        loc["index"] = i - s.edge_rows()[s.edges[i]].start
        loc["chainage_m"] = float(s.chainage_m[i])
    if s.distance_m is not None:
        loc["distance_m"] = float(s.distance_m[i])
    if s.offset_m is not None:
        loc["offset_m"] = float(s.offset_m[i])
    if s.ids is not None:
        loc["id"], loc["name"] = s.ids[i], s.names[i]
    return loc


def _edge_location(ev: Evaluation, row: int) -> dict[str, Any]:
    loc = where(ev, row)
    return {k: loc[k] for k in ("index", "x", "y", "chainage_m", "distance_m")}


def _zones_block(ev: Evaluation) -> dict[str, Any] | None:
    """Zones FeatureCollection with presentation-unit limits added to each feature's properties."""
    if ev.zones is None:
        return None
    features = []
    for feat, t in zip(ev.zones["features"], ev.zone_thresholds):
        props = dict(feat["properties"])
        props.update({k: v for k, v in threshold_row(t).items() if k.startswith("limit_") or k == "unit"})
        features.append({**feat, "properties": props})
    return {"type": "FeatureCollection", "features": features}


class RouteView:
    """The route geometry: evaluator :func:`models.route.evaluate_route`."""

    geometry = "route"

    def check(self, request: RouteAssessmentRequest) -> None:
        """Nothing before the thresholds: the route engine checks its input."""

    def evaluate(self, request: RouteAssessmentRequest, line: Any, *, bounds: Mapping[str, int] | None = None,
                 zones: bool = True) -> Evaluation:
        sets = request.sets if zones else dataclasses.replace(request.sets, zones=None)
        return evaluate_route(line, request.frequency_hz, sets, crs=request.crs,
                              soil_resistivity_ohm_m=request.soil_resistivity_ohm_m, **(bounds or {}))

    def plain(self, request: RouteAssessmentRequest) -> dict[str, Any]:
        return route_request_to_plain(request)

    def members(self, request: RouteAssessmentRequest, ev: Evaluation) -> dict[str, Any]:
        return {"crs": {"request": ev.frame.request_crs, "working": ev.frame.working_crs,
                        "geographic": ev.frame.geographic},
                "results": results_block(ev), "zones": _zones_block(ev), "segment_counts": ev.segment_counts}

    def location(self, ev: Evaluation, row: int) -> dict[str, Any]:
        return where(ev, row)

    def max_location(self, ev: Evaluation, row: int) -> tuple[dict[str, Any], dict[str, Any]]:
        return {}, {"max_location": where(ev, row)}

    def distance_note(self, judgement: Judgement) -> str:
        d = judgement.distances
        if d is None:
            return "no lateral profile requested; see the zone widths"
        return "from the lateral profile" + (f"; {d.distance_note}" if d.distance_note else "")

    def edge_block(self, request: RouteAssessmentRequest, ev: Evaluation, edges: list[EdgeMaximum],
                   exposure: list[list[dict[str, Any]]]) -> dict[str, Any]:
        spec = request.sets.right_of_way
        s = ev.sets["right_of_way"]
        out = []
        for samples, e, x in zip(s.edge_samples, edges, exposure):
            vx, vy = ev.frame.to_request(samples.vertices_m[:, 0], samples.vertices_m[:, 1])
            out.append({
                "edge": e.edge, "offset_m": float(samples.offset_m), "height_m": float(spec.height_m),
                "n_points": int(e.rows.stop - e.rows.start), "length_m": samples.length_m,
                "e_kv_m": float(v_per_m_to_kv_per_m(e.e_v_per_m)), "b_ut": float(t_to_ut(e.b_t)),
                "e_location": _edge_location(ev, e.e_row), "b_location": _edge_location(ev, e.b_row),
                "exposure": x,
                "geometry": {"type": "LineString", "coordinates": [[float(a), float(b)] for a, b in zip(vx, vy)]},
            })
        return {"left_m": spec.left_m, "right_m": spec.right_m, "step_m": spec.step_m, "height_m": spec.height_m,
                "note": s.note, "edges": out}

    def case_members(self, ev: Evaluation) -> dict[str, Any]:
        s = ev.sets.get("receptors")
        if s is None:
            return {"receptors": []}
        return {"receptors": resultant_rows({"id": s.ids, "name": s.names}, s.field)}


ROUTE = RouteView()
