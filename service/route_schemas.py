"""Request schemas for route assessments (3-D): a line in map coordinates and its evaluation sets.

A route request is an assessment body (:class:`service.schemas.AssessmentBaseSchema`:
title, reference, frequency, reference levels, custom limits) with ``route`` instead
of ``cross_section`` and, instead of ``profile``/``points``, any combination of the
evaluation sets ``path``, ``lateral_profile``, ``receptors``, ``grid``, ``right_of_way``
(the two edges sampled along the whole route) and ``zones`` (contoured from the grid).  GeoJSON members follow RFC 7946: a path geometry is a
``LineString`` of at least two positions, receptors a ``FeatureCollection`` of
``Point`` features; positions are ``[x, y]`` (an optional third value, altitude,
is accepted and ignored: heights come from ``height_m``); all numbers finite;
longitudes within [-180, 180] and latitudes within [-90, 90] when the route's CRS is
geographic.  The loaded request holds engine dataclasses (:mod:`models.route.types`,
:mod:`models.route.sets`).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any

import numpy as np
from marshmallow import EXCLUDE, Schema, ValidationError, fields, post_load, validate, validates_schema
from shapely.geometry import LineString

from models.errors import EngineInputError
from models.load_cases import LoadCase
from models.studies import ClearanceStudy, PhaseArrangementStudy
from models.route.crs import is_geographic
from models.route.sets import (
    CustomZoneLimit,
    EvaluationSets,
    GridSet,
    LateralProfileSet,
    PathSet,
    Receptor,
    ZoneSet,
)
from models.route.right_of_way import DEFAULT_EDGE_HEIGHT_M, DEFAULT_EDGE_STEP_M, RightOfWaySet
from models.route.types import Attachment, Route, RouteCircuit, RouteConductor, RouteEarthWire, Support

from .schema_fields import (
    ID_TEXT,
    LOAD_CASE_POINT_FACTOR,
    NON_NEGATIVE,
    POSITIVE,
    UNITS,
    AssessmentBaseSchema,
    CustomLimit,
    FiniteFloat,
    check_harmonic_work,
    check_harmonics,
    check_load_cases,
    check_lon_lat,
    check_unique,
    to_plain,
)
from .schemas import CircuitSchema, CurrentPhasorSchema, ProfileSchema, RightOfWaySchema, VoltagePhasorSchema

MAX_SUPPORTS = 200
MAX_PATH_POSITIONS = 10_000
MAX_ZONE_THRESHOLDS = 16
DEFAULT_MAX_ROUTE_POINTS = 200_000
"""Default cap on observation points of one route request (all sets; ``EMF_MAX_ROUTE_POINTS``)."""
DEFAULT_MAX_GRID_POINTS = 100_000
"""Default cap on the nodes of one route request's grid (``EMF_MAX_GRID_POINTS``)."""

_EARTH_RADIUS_M = 6_371_008.8  # mean Earth radius (IUGG), only for the grid-size estimate in lon/lat


# --------------------------------------------------------------------------- route


class SupportSchema(Schema):
    id = fields.String(required=True, validate=ID_TEXT)
    x = FiniteFloat(required=True)
    y = FiniteFloat(required=True)
    ground_elevation_m = FiniteFloat(load_default=0.0)

    @post_load
    def make(self, data: dict[str, Any], **kwargs: Any) -> Support:
        return Support(data["id"], data["x"], data["y"], data["ground_elevation_m"])


class AttachmentSchema(Schema):
    offset_m = FiniteFloat(required=True)
    height_m = FiniteFloat(required=True)

    @post_load
    def make(self, data: dict[str, Any], **kwargs: Any) -> Attachment:
        return Attachment(**data)


class _StrungSchema(Schema):
    """Fields shared by route conductors and earth wires."""

    offset_m = FiniteFloat(required=True)
    height_m = FiniteFloat(required=True)
    sag_m = FiniteFloat(load_default=0.0, validate=NON_NEGATIVE)
    attachments = fields.List(fields.Nested(AttachmentSchema), validate=validate.Length(min=2, max=MAX_SUPPORTS))
    current = fields.Nested(CurrentPhasorSchema)


class RouteConductorSchema(_StrungSchema):
    phase = fields.String(required=True, validate=validate.Length(min=1, max=8))
    horizontal_tension_n = FiniteFloat(validate=POSITIVE)
    weight_n_per_m = FiniteFloat(validate=POSITIVE)
    voltage_to_ground = fields.Nested(VoltagePhasorSchema)

    @validates_schema
    def tension_and_weight_together(self, data: dict[str, Any], **kwargs: Any) -> None:
        has_h, has_w = "horizontal_tension_n" in data, "weight_n_per_m" in data
        if has_h != has_w:
            missing = "weight_n_per_m" if has_h else "horizontal_tension_n"
            raise ValidationError("Give horizontal_tension_n and weight_n_per_m together.", field_name=missing)

    @post_load
    def make(self, data: dict[str, Any], **kwargs: Any) -> RouteConductor:
        if "attachments" in data:
            data["attachments"] = tuple(data["attachments"])
        return RouteConductor(**data)


class RouteEarthWireSchema(_StrungSchema):
    diameter_m = FiniteFloat(required=True, validate=POSITIVE)

    @post_load
    def make(self, data: dict[str, Any], **kwargs: Any) -> RouteEarthWire:
        if "attachments" in data:
            data["attachments"] = tuple(data["attachments"])
        return RouteEarthWire(**data)


class RouteCircuitSchema(CircuitSchema):
    """A circuit as in the cross-section, its conductors strung along the route (cable screens: cross-sections only)."""

    class Meta:
        exclude = ("screen",)

    conductors = fields.List(fields.Nested(RouteConductorSchema), required=True, validate=validate.Length(min=1))

    @post_load
    def make(self, data: dict[str, Any], **kwargs: Any) -> RouteCircuit:
        data["conductors"] = tuple(data["conductors"])
        check_harmonics(data)
        return RouteCircuit(**data)


def crs_is_geographic(crs: str | None) -> bool:
    """True for a geographic (lon/lat) CRS (:func:`models.route.crs.is_geographic`); 422 at ``crs`` for an unknown one."""
    try:
        return is_geographic(crs)
    except EngineInputError as exc:
        raise ValidationError(exc.message, field_name="crs") from None


class RouteSchema(Schema):
    crs = fields.String(load_default=None, allow_none=True, validate=validate.Length(min=1, max=500))
    supports = fields.List(fields.Nested(SupportSchema), required=True,
                           validate=validate.Length(min=2, max=MAX_SUPPORTS))
    circuits = fields.List(fields.Nested(RouteCircuitSchema), required=True, validate=validate.Length(min=1))
    earth_wires = fields.List(fields.Nested(RouteEarthWireSchema), load_default=list)

    @validates_schema
    def consistent(self, data: dict[str, Any], **kwargs: Any) -> None:
        supports: list[Support] = data["supports"]
        check_unique([s.id for s in supports], lambda i: ("supports", i, "id"), "support id")
        check_unique([c.id for c in data["circuits"]], lambda i: ("circuits", i, "id"), "circuit id")
        n = len(supports)
        for i, c in enumerate(data["circuits"]):
            for j, cond in enumerate(c.conductors):
                if cond.attachments is not None and len(cond.attachments) != n:
                    raise ValidationError({"circuits": {i: {"conductors": {j: {"attachments": [
                        f"Give one attachment per support ({n}); instead received {len(cond.attachments)}."]}}}}})
        for k, w in enumerate(data["earth_wires"]):
            if w.attachments is not None and len(w.attachments) != n:
                raise ValidationError({"earth_wires": {k: {"attachments": [
                    f"Give one attachment per support ({n}); instead received {len(w.attachments)}."]}}})
        if crs_is_geographic(data["crs"]):
            for i, s in enumerate(supports):
                check_lon_lat(s.x, s.y, ("supports", i, "x"), ("supports", i, "y"))

    @post_load
    def make(self, data: dict[str, Any], **kwargs: Any) -> dict[str, Any]:
        route = Route(tuple(data["supports"]), tuple(data["circuits"]), tuple(data["earth_wires"]))
        return {"crs": data["crs"], "route": route}


# --------------------------------------------------------------------------- GeoJSON (RFC 7946)


class Position(fields.List):
    """An RFC 7946 position: 2 (or 3, altitude ignored) finite numbers."""

    def __init__(self, **kwargs: Any):
        super().__init__(FiniteFloat(), validate=validate.Length(min=2, max=3,
                         error="A position has 2 numbers [x, y] (or 3 with altitude)."), **kwargs)


class LineStringSchema(Schema):
    type = fields.String(required=True, validate=validate.Equal("LineString", error="Must be 'LineString'."))
    coordinates = fields.List(Position(), required=True, validate=validate.Length(
        min=2, max=MAX_PATH_POSITIONS, error="A LineString has at least 2 positions (at most {max})."))
    bbox = fields.List(FiniteFloat(), validate=validate.Length(min=4, max=6))


class PointGeometrySchema(Schema):
    type = fields.String(required=True, validate=validate.Equal("Point", error="Must be 'Point'."))
    coordinates = Position(required=True)
    bbox = fields.List(FiniteFloat(), validate=validate.Length(min=4, max=6))


class ReceptorPropertiesSchema(Schema):
    class Meta:
        unknown = EXCLUDE  # GeoJSON properties may carry anything else (address, parcel, ...)

    id = fields.String(required=True, validate=ID_TEXT)
    name = fields.String(load_default=None, allow_none=True, validate=validate.Length(max=200))
    height_m = FiniteFloat(required=True, validate=NON_NEGATIVE)


class ReceptorFeatureSchema(Schema):
    type = fields.String(required=True, validate=validate.Equal("Feature", error="Must be 'Feature'."))
    id = fields.Raw()  # RFC 7946 sec. 3.2: optional string or number; properties.id is the one used
    geometry = fields.Nested(PointGeometrySchema, required=True)
    properties = fields.Nested(ReceptorPropertiesSchema, required=True)
    bbox = fields.List(FiniteFloat(), validate=validate.Length(min=4, max=6))

    @post_load
    def make(self, data: dict[str, Any], **kwargs: Any) -> Receptor:
        p = data["properties"]
        x, y = data["geometry"]["coordinates"][:2]
        return Receptor(p["id"], p["name"] if p["name"] is not None else p["id"], x, y, p["height_m"])


class ReceptorCollectionSchema(Schema):
    type = fields.String(required=True,
                         validate=validate.Equal("FeatureCollection", error="Must be 'FeatureCollection'."))
    features = fields.List(fields.Nested(ReceptorFeatureSchema), required=True,
                           validate=validate.Length(min=1, error="Give at least one receptor."))
    bbox = fields.List(FiniteFloat(), validate=validate.Length(min=4, max=6))

    @validates_schema
    def unique_ids(self, data: dict[str, Any], **kwargs: Any) -> None:
        check_unique([r.id for r in data["features"]], lambda i: ("features", i, "properties", "id"), "receptor id")

    @post_load
    def make(self, data: dict[str, Any], **kwargs: Any) -> tuple[Receptor, ...]:
        return tuple(data["features"])


# --------------------------------------------------------------------------- evaluation sets


class PathSchema(Schema):
    geometry = fields.Nested(LineStringSchema, required=True)
    step_m = FiniteFloat(required=True, validate=POSITIVE)
    height_m = FiniteFloat(required=True, validate=NON_NEGATIVE)

    @post_load
    def make(self, data: dict[str, Any], **kwargs: Any) -> PathSet:
        coords = [tuple(p[:2]) for p in data["geometry"]["coordinates"]]
        return PathSet(LineString(coords), data["step_m"], data["height_m"])


class LateralProfileSchema(ProfileSchema):
    """A cross-section profile (same fields and checks) placed at a chainage along the route."""

    chainage_m = FiniteFloat(required=True, validate=NON_NEGATIVE)

    @post_load
    def make(self, data: dict[str, Any], **kwargs: Any) -> LateralProfileSet:
        return LateralProfileSet(**data)


class GridSchema(Schema):
    bbox = fields.List(FiniteFloat(), required=True,
                       validate=validate.Length(equal=4, error="Give [minx, miny, maxx, maxy]."))
    resolution_m = FiniteFloat(required=True, validate=POSITIVE)
    height_m = FiniteFloat(required=True, validate=NON_NEGATIVE)

    @validates_schema
    def ordered(self, data: dict[str, Any], **kwargs: Any) -> None:
        minx, miny, maxx, maxy = data["bbox"]
        if not (maxx > minx and maxy > miny):
            raise ValidationError("Must be [minx, miny, maxx, maxy] with maxx > minx and maxy > miny "
                                  "(a box across the antimeridian is not supported).", field_name="bbox")

    @post_load
    def make(self, data: dict[str, Any], **kwargs: Any) -> GridSet:
        return GridSet(tuple(data["bbox"]), data["resolution_m"], data["height_m"])


class RouteRightOfWaySchema(RightOfWaySchema):
    """Right-of-way edges along a route: the cross-section's offsets plus sample spacing and height.

    The cross-section member (:class:`service.schemas.RightOfWaySchema`) accepts only
    ``left_m``/``right_m``: there the edges are two points of the section, evaluated at
    the profile height.
    """

    step_m = FiniteFloat(load_default=DEFAULT_EDGE_STEP_M, validate=POSITIVE)
    height_m = FiniteFloat(load_default=DEFAULT_EDGE_HEIGHT_M, validate=NON_NEGATIVE)

    @post_load
    def make(self, data: dict[str, Any], **kwargs: Any) -> RightOfWaySet:
        return RightOfWaySet(data["left_m"], data["right_m"], data["step_m"], data["height_m"])


class ZoneThresholdField(fields.Field):
    """A zone threshold: a catalogue id (string) or ``{"id", "value", "unit"}`` (unit decides E or B)."""

    # marshmallow formats these with str.format: literal braces must be doubled.
    default_error_messages = {"invalid": "Give a reference-level id or an object {{id, value, unit}}."}

    def _deserialize(self, value: Any, attr: str | None, data: Any, **kwargs: Any) -> str | CustomZoneLimit:
        if isinstance(value, str):
            if not 1 <= len(value) <= 64:
                raise ValidationError("Length must be between 1 and 64.")
            return value
        if isinstance(value, dict):
            return _CustomZoneLimitSchema().load(value)
        raise self.make_error("invalid")


class _CustomZoneLimitSchema(Schema):
    id = fields.String(required=True, validate=ID_TEXT)
    value = FiniteFloat(required=True, validate=POSITIVE)
    unit = fields.String(required=True, validate=UNITS)

    @post_load
    def make(self, data: dict[str, Any], **kwargs: Any) -> CustomZoneLimit:
        return CustomZoneLimit(**data)


class ZonesSchema(Schema):
    thresholds = fields.List(ZoneThresholdField(), required=True,
                             validate=validate.Length(min=1, max=MAX_ZONE_THRESHOLDS))

    @post_load
    def make(self, data: dict[str, Any], **kwargs: Any) -> ZoneSet:
        return ZoneSet(tuple(data["thresholds"]))


# --------------------------------------------------------------------------- the request


@dataclass(frozen=True)
class RouteAssessmentRequest:
    """A validated assessment request for a route (3-D)."""

    title: str
    reference: str
    frequency_hz: float
    route: Route
    evaluation: EvaluationSets
    crs: str | None = None
    reference_levels: tuple[str, ...] = ()
    custom_limits: tuple[CustomLimit, ...] = ()
    soil_resistivity_ohm_m: float | None = None
    load_cases: tuple[LoadCase, ...] | None = None
    study: ClearanceStudy | PhaseArrangementStudy | None = None
    point_counts: dict = field(default_factory=dict, compare=False)
    """Estimated points per evaluation set (from the schema's size checks; not part of the request)."""

    @property
    def line(self) -> Route:
        """The line as given (base loading)."""
        return self.route

    @property
    def sets(self) -> EvaluationSets:
        """Where the fields are evaluated."""
        return self.evaluation


def _length_estimate_m(xy: np.ndarray, geographic: bool) -> float:
    """Length [m] of a polyline; in lon/lat by the local equirectangular scale (for the point-count checks only)."""
    xy = np.asarray(xy, dtype=float)
    if not geographic:
        return float(np.sum(np.hypot(*np.diff(xy, axis=0).T)))
    xy = np.radians(xy)
    dx = np.diff(xy[:, 0]) * np.cos(0.5 * (xy[1:, 1] + xy[:-1, 1]))
    dy = np.diff(xy[:, 1])
    return float(np.sum(np.hypot(dx, dy)) * _EARTH_RADIUS_M)


def _grid_points_estimate(grid: GridSet, geographic: bool) -> float:
    minx, miny, maxx, maxy = grid.bbox
    if geographic:
        lat = math.radians(max(min((miny + maxy) / 2.0, 89.0), -89.0))
        width = math.radians(maxx - minx) * _EARTH_RADIUS_M * math.cos(lat)
        height = math.radians(maxy - miny) * _EARTH_RADIUS_M
    else:
        width, height = maxx - minx, maxy - miny
    return (math.ceil(width / grid.resolution_m) + 1) * (math.ceil(height / grid.resolution_m) + 1)


class RouteAssessmentSchema(AssessmentBaseSchema):
    """Assessment of a route (3-D) on any combination of evaluation sets."""

    route = fields.Nested(RouteSchema, required=True)
    path = fields.Nested(PathSchema)
    lateral_profile = fields.Nested(LateralProfileSchema)
    receptors = fields.Nested(ReceptorCollectionSchema)
    grid = fields.Nested(GridSchema)
    zones = fields.Nested(ZonesSchema)
    right_of_way = fields.Nested(RouteRightOfWaySchema)

    def __init__(self, *, max_route_points: int = DEFAULT_MAX_ROUTE_POINTS,
                 max_grid_points: int = DEFAULT_MAX_GRID_POINTS, **kwargs: Any):
        super().__init__(**kwargs)
        self.max_route_points = max_route_points
        self.max_grid_points = max_grid_points

    @validates_schema
    def sets_and_size(self, data: dict[str, Any], **kwargs: Any) -> None:
        if "route" not in data:
            return  # reported by the field itself
        if not any(k in data for k in ("path", "lateral_profile", "receptors", "grid", "right_of_way")):
            raise ValidationError("Give at least one evaluation set: path, lateral_profile, receptors, grid or "
                                  "right_of_way.", field_name="path")
        if "zones" in data and "grid" not in data:
            raise ValidationError("Exposure zones are contoured from the grid evaluation set; add a grid.",
                                  field_name="zones")
        route: Route = data["route"]["route"]
        geographic = crs_is_geographic(data["route"]["crs"])
        self.check_conductor_count(route.circuits, route.earth_wires, "route")
        if geographic:
            self._check_lon_lat(data)
        cap = self.max_route_points
        counts: dict[str, float] = {}
        if "receptors" in data:
            counts["receptors"] = len(data["receptors"])
            _within(counts["receptors"], cap, ("receptors", "features"), "receptors given", "MAX_ROUTE_POINTS")
        if "path" in data:
            counts["path"] = _length_estimate_m(data["path"].geometry.coords, geographic) / data["path"].step_m + 2
            _within(counts["path"], cap, ("path", "step_m"), "points on the path", "MAX_ROUTE_POINTS")
        if "lateral_profile" in data:
            lp = data["lateral_profile"]
            counts["lateral_profile"] = (lp.to_m - lp.from_m) / lp.step_m + 2
            _within(counts["lateral_profile"], cap, ("lateral_profile", "step_m"), "points on the lateral profile",
                    "MAX_ROUTE_POINTS")
        if "grid" in data:
            counts["grid"] = _grid_points_estimate(data["grid"], geographic)
            grid_cap, limit = ((self.max_grid_points, "MAX_GRID_POINTS") if self.max_grid_points < cap
                               else (cap, "MAX_ROUTE_POINTS"))
            _within(counts["grid"], grid_cap, ("grid", "resolution_m"), "grid points", limit)
        if "right_of_way" in data:
            row = data["right_of_way"]
            # each edge is about as long as the centre line (mitres at angle supports add or take |offset| tan)
            length = _length_estimate_m([(s.x, s.y) for s in route.supports], geographic)
            counts["right_of_way"] = 2 * (length / row.step_m + 2)
            _within(counts["right_of_way"], cap, ("right_of_way", "step_m"), "points on the right-of-way edges",
                    "MAX_ROUTE_POINTS")
        self.point_counts = counts
        total = sum(counts.values())
        if total > cap:
            largest = max(counts, key=counts.get)
            raise ValidationError({largest: [f"The evaluation sets together have about {total:.0f} points; at most "
                                             f"{cap} are allowed per request (limit MAX_ROUTE_POINTS)."]})
        if data.get("load_cases"):
            check_load_cases(data["load_cases"], route.circuits, total, LOAD_CASE_POINT_FACTOR * cap,
                             earth_wires=len(route.earth_wires))
        check_harmonic_work(route.circuits, len(data.get("load_cases") or ()), total, LOAD_CASE_POINT_FACTOR * cap,
                            "route")

    @staticmethod
    def _check_lon_lat(data: dict[str, Any]) -> None:
        if "path" in data:
            for i, (x, y) in enumerate(data["path"].geometry.coords):
                check_lon_lat(x, y, ("path", "geometry", "coordinates", i))
        for i, r in enumerate(data.get("receptors", ())):
            check_lon_lat(r.x, r.y, ("receptors", "features", i, "geometry", "coordinates"))
        if "grid" in data:
            minx, miny, maxx, maxy = data["grid"].bbox
            check_lon_lat(minx, miny, ("grid", "bbox"))
            check_lon_lat(maxx, maxy, ("grid", "bbox"))

    @post_load
    def make(self, data: dict[str, Any], **kwargs: Any) -> RouteAssessmentRequest:
        sets = EvaluationSets(path=data.get("path"), lateral_profile=data.get("lateral_profile"),
                              receptors=data.get("receptors", ()), grid=data.get("grid"), zones=data.get("zones"),
                              right_of_way=data.get("right_of_way"))
        return RouteAssessmentRequest(
            title=data["title"], reference=data["reference"], frequency_hz=data["frequency_hz"],
            route=data["route"]["route"], crs=data["route"]["crs"], evaluation=sets,
            reference_levels=tuple(data["reference_levels"]), custom_limits=tuple(data["custom_limits"]),
            soil_resistivity_ohm_m=data.get("soil_resistivity_ohm_m"),
            load_cases=tuple(data["load_cases"]) if "load_cases" in data else None, study=data.get("study"),
            point_counts=dict(getattr(self, "point_counts", {})))


def geometry_kind(body: Any) -> str:
    """``"route"`` or ``"cross_section"``: which geometry an assessment body describes.

    A body that is not an object is left to the cross-section schema (it reports the type).

    :raise marshmallow.ValidationError: when the body has both ``route`` and
        ``cross_section``, or neither (422 naming the members).
    """
    if not isinstance(body, dict):
        return "cross_section"
    has_route, has_section = "route" in body, "cross_section" in body
    if has_route and has_section:
        raise ValidationError({"route": ["Give either cross_section (a 2-D section) or route (a line in map "
                                         "coordinates), not both."]})
    if not has_route and not has_section:
        message = "Missing: give exactly one of cross_section (a 2-D section) or route (a line in map coordinates)."
        raise ValidationError({"cross_section": [message], "route": [message]})
    return "route" if has_route else "cross_section"


def _within(count: float, cap: int, path: tuple[str, str], what: str, limit: str) -> None:
    """Refuse a set whose (estimated) size exceeds ``cap``, naming the field and the setting."""
    if count > cap:
        raise ValidationError({path[0]: {path[1]: [
            f"About {count:.0f} {what}; at most {cap} are allowed per request (limit {limit})."]}})


def load_route_request(body: Any, *, max_route_points: int, max_conductors: int,
                       max_grid_points: int = DEFAULT_MAX_GRID_POINTS) -> RouteAssessmentRequest:
    """Validate a route request body.

    :raise marshmallow.ValidationError: with per-field messages (mapped to 422).
    """
    return RouteAssessmentSchema(max_route_points=max_route_points, max_grid_points=max_grid_points,
                                 max_conductors=max_conductors).load(body)


# --------------------------------------------------------------------------- normalised form


def _drop_none(d: dict[str, Any]) -> dict[str, Any]:
    return {k: v for k, v in d.items() if v is not None}


def _phasor(p: Any) -> dict[str, float] | None:
    return None if p is None else to_plain(p)


def _strung_plain(w: Any) -> dict[str, Any]:
    out = {"offset_m": w.offset_m, "height_m": w.height_m, "sag_m": w.sag_m,
           "attachments": None if w.attachments is None else [
               {"offset_m": a.offset_m, "height_m": a.height_m} for a in w.attachments],
           "current": _phasor(w.current)}
    return _drop_none(out)


def route_request_to_plain(req: RouteAssessmentRequest) -> dict[str, Any]:
    """The normalised request in its JSON form (loads again to an equal request)."""
    route = req.route
    circuits = []
    for c in route.circuits:
        conductors = []
        for cond in c.conductors:
            item = {"phase": cond.phase, **_strung_plain(cond),
                    "horizontal_tension_n": cond.horizontal_tension_n, "weight_n_per_m": cond.weight_n_per_m,
                    "voltage_to_ground": _phasor(cond.voltage_to_ground)}
            conductors.append(_drop_none(item))
        circuits.append({"id": c.id, "kind": c.kind, "voltage_kv": c.voltage_kv, "current_a": c.current_a,
                         "conductors": conductors, "bundle": to_plain(c.bundle),
                         "reverse_sequence": c.reverse_sequence, "angle_offset_deg": c.angle_offset_deg})
        if c.harmonics is not None:
            circuits[-1]["harmonics"] = to_plain(list(c.harmonics))
    earth_wires = [{**_strung_plain(w), "diameter_m": w.diameter_m} for w in route.earth_wires]
    body: dict[str, Any] = {
        "title": req.title, "reference": req.reference, "frequency_hz": req.frequency_hz,
        "route": _drop_none({"crs": req.crs,
                             "supports": [{"id": s.id, "x": s.x, "y": s.y, "ground_elevation_m": s.ground_elevation_m}
                                          for s in route.supports],
                             "circuits": circuits, "earth_wires": earth_wires}),
        "reference_levels": list(req.reference_levels),
        "custom_limits": to_plain(list(req.custom_limits)),
    }
    if req.soil_resistivity_ohm_m is not None:
        body["soil_resistivity_ohm_m"] = req.soil_resistivity_ohm_m
    ev = req.evaluation
    if ev.path is not None:
        body["path"] = {"geometry": {"type": "LineString", "coordinates": [list(c) for c in ev.path.geometry.coords]},
                        "step_m": ev.path.step_m, "height_m": ev.path.height_m}
    if ev.lateral_profile is not None:
        body["lateral_profile"] = to_plain(ev.lateral_profile)
    if ev.receptors:
        body["receptors"] = {"type": "FeatureCollection", "features": [
            {"type": "Feature", "geometry": {"type": "Point", "coordinates": [r.x, r.y]},
             "properties": {"id": r.id, "name": r.name, "height_m": r.height_m}} for r in ev.receptors]}
    if ev.grid is not None:
        body["grid"] = {"bbox": list(ev.grid.bbox), "resolution_m": ev.grid.resolution_m, "height_m": ev.grid.height_m}
    if ev.right_of_way is not None:
        row = ev.right_of_way
        body["right_of_way"] = {"left_m": row.left_m, "right_m": row.right_m, "step_m": row.step_m,
                                "height_m": row.height_m}
    if ev.zones is not None:
        body["zones"] = {"thresholds": [t if isinstance(t, str) else to_plain(t) for t in ev.zones.thresholds]}
    if req.load_cases:
        body["load_cases"] = to_plain(list(req.load_cases))
    if req.study is not None:
        body["study"] = to_plain(req.study)
    return body
