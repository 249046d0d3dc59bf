"""Request schemas (marshmallow 4): JSON in, engine dataclasses out.

The schemas check types, required fields, ranges and request-size limits, keep
marshmallow's default ``unknown=RAISE`` and return frozen dataclasses
(:mod:`models.geometry` and :class:`AssessmentRequest`), so no raw dict reaches the
engine.  Physical invariants (conductors clear of the ground and of each other,
phase labels, frequency range) are the engine's checks and run there
(:func:`models.sources.validate_cross_section`); reference-level ids are checked by
the catalogue.

Numbers must be JSON numbers: strings, booleans, NaN and ±Infinity are refused
(Python's JSON parser accepts the bare tokens ``NaN`` and ``Infinity``).

The body schema is modular: :class:`AssessmentBaseSchema` holds the fields every
assessment has; :class:`CrossSectionAssessmentSchema` adds the 2-D geometry and the
evaluation points.  Another geometry (e.g. a route) is another subclass, chosen in
:func:`load_assessment_request`.
"""

from __future__ import annotations

import dataclasses
import math
from collections.abc import Mapping
from dataclasses import dataclass
from typing import Any

from marshmallow import Schema, ValidationError, fields, post_load, validate, validates_schema

from models.geometry import Bundle, Circuit, Conductor, CrossSection, CurrentPhasor, EarthWire, VoltagePhasor

POSITIVE = validate.Range(min=0, min_inclusive=False, error="Must be greater than 0.")
NON_NEGATIVE = validate.Range(min=0, error="Must be greater than or equal to 0.")
TEXT = validate.Length(min=1, max=200)
ID_TEXT = validate.Length(min=1, max=64)


class FiniteFloat(fields.Float):
    """A JSON number that is finite: no strings, booleans, NaN or infinities."""

    default_error_messages = {"invalid": "Not a valid number.",
                              "special": "Must be a finite number (NaN and Infinity are not allowed)."}

    def __init__(self, **kwargs: Any):
        kwargs.setdefault("allow_nan", False)
        super().__init__(**kwargs)

    def _deserialize(self, value: Any, attr: str | None, data: Mapping[str, Any] | None, **kwargs: Any) -> float:
        if isinstance(value, (str, bool)):
            raise self.make_error("invalid")
        return super()._deserialize(value, attr, data, **kwargs)


# --------------------------------------------------------------------------- cross-section


class CurrentPhasorSchema(Schema):
    magnitude_a = FiniteFloat(required=True, validate=NON_NEGATIVE)
    angle_deg = FiniteFloat(required=True)

    @post_load
    def make(self, data: dict[str, Any], **kwargs: Any) -> CurrentPhasor:
        return CurrentPhasor(**data)


class VoltagePhasorSchema(Schema):
    magnitude_kv = FiniteFloat(required=True, validate=NON_NEGATIVE)
    angle_deg = FiniteFloat(required=True)

    @post_load
    def make(self, data: dict[str, Any], **kwargs: Any) -> VoltagePhasor:
        return VoltagePhasor(**data)


class ConductorSchema(Schema):
    phase = fields.String(required=True, validate=validate.Length(min=1, max=8))
    offset_m = FiniteFloat(required=True)
    height_m = FiniteFloat(required=True)
    current = fields.Nested(CurrentPhasorSchema)
    voltage_to_ground = fields.Nested(VoltagePhasorSchema)

    @post_load
    def make(self, data: dict[str, Any], **kwargs: Any) -> Conductor:
        return Conductor(**data)


class BundleSchema(Schema):
    count = fields.Integer(strict=True, load_default=1, validate=validate.Range(min=1, max=16))
    spacing_m = FiniteFloat(validate=POSITIVE)
    subconductor_diameter_m = FiniteFloat(required=True, validate=POSITIVE)

    @validates_schema
    def spacing_given_for_bundles(self, data: dict[str, Any], **kwargs: Any) -> None:
        if data.get("count", 1) > 1 and data.get("spacing_m") is None:
            raise ValidationError("Required when count > 1.", field_name="spacing_m")

    @post_load
    def make(self, data: dict[str, Any], **kwargs: Any) -> Bundle:
        return Bundle(**data)


class CircuitSchema(Schema):
    id = fields.String(required=True, validate=ID_TEXT)
    kind = fields.String(required=True, validate=validate.OneOf(["overhead", "underground"]))
    voltage_kv = FiniteFloat(required=True, validate=NON_NEGATIVE)
    current_a = FiniteFloat(required=True, validate=NON_NEGATIVE)
    conductors = fields.List(fields.Nested(ConductorSchema), required=True, validate=validate.Length(min=1))
    bundle = fields.Nested(BundleSchema, required=True)
    reverse_sequence = fields.Boolean(load_default=False, truthy={True}, falsy={False})
    angle_offset_deg = FiniteFloat(load_default=0.0)

    @post_load
    def make(self, data: dict[str, Any], **kwargs: Any) -> Circuit:
        data["conductors"] = tuple(data["conductors"])
        return Circuit(**data)


class EarthWireSchema(Schema):
    offset_m = FiniteFloat(required=True)
    height_m = FiniteFloat(required=True, validate=POSITIVE)
    diameter_m = FiniteFloat(required=True, validate=POSITIVE)
    current = fields.Nested(CurrentPhasorSchema)

    @post_load
    def make(self, data: dict[str, Any], **kwargs: Any) -> EarthWire:
        return EarthWire(**data)


class CrossSectionSchema(Schema):
    circuits = fields.List(fields.Nested(CircuitSchema), required=True, validate=validate.Length(min=1))
    earth_wires = fields.List(fields.Nested(EarthWireSchema), load_default=list)

    @validates_schema
    def unique_circuit_ids(self, data: dict[str, Any], **kwargs: Any) -> None:
        ids = [c.id for c in data["circuits"]]
        for i, cid in enumerate(ids):
            if cid in ids[:i]:
                raise ValidationError({"circuits": {i: {"id": [f"Duplicate circuit id {cid!r}."]}}})

    @post_load
    def make(self, data: dict[str, Any], **kwargs: Any) -> CrossSection:
        return CrossSection(tuple(data["circuits"]), tuple(data["earth_wires"]))


# --------------------------------------------------------------------------- evaluation points


@dataclass(frozen=True)
class Profile:
    """Lateral profile: offsets from ``from_m`` to ``to_m`` (both included) every ``step_m``, at ``height_m``."""

    from_m: float
    to_m: float
    step_m: float
    height_m: float


@dataclass(frozen=True)
class Point:
    offset_m: float
    height_m: float


def profile_point_count(from_m: float, to_m: float, step_m: float) -> float:
    """Number of points of a lateral profile (both ends included), as float (may be huge).

    Offsets are ``from_m + k * step_m`` for ``k = 0, 1, ...`` up to ``to_m``; if the
    last one falls short of ``to_m`` (beyond a 1e-9 relative tolerance), ``to_m`` is
    added as the final point.

    >>> profile_point_count(-50.0, 50.0, 0.5), profile_point_count(0.0, 1.0, 0.3)
    (201.0, 5.0)
    """
    span = (to_m - from_m) / step_m
    whole = math.floor(span + 1e-9)
    return float(whole + 1 + (1 if span - whole > 1e-9 else 0))


class ProfileSchema(Schema):
    from_m = FiniteFloat(required=True)
    to_m = FiniteFloat(required=True)
    step_m = FiniteFloat(required=True, validate=POSITIVE)
    height_m = FiniteFloat(required=True, validate=NON_NEGATIVE)

    @validates_schema
    def non_empty(self, data: dict[str, Any], **kwargs: Any) -> None:
        if not data["to_m"] > data["from_m"]:
            raise ValidationError("Must be greater than from_m (the profile would be empty).", field_name="to_m")

    @post_load
    def make(self, data: dict[str, Any], **kwargs: Any) -> Profile:
        return Profile(**data)


class PointSchema(Schema):
    offset_m = FiniteFloat(required=True)
    height_m = FiniteFloat(required=True, validate=NON_NEGATIVE)

    @post_load
    def make(self, data: dict[str, Any], **kwargs: Any) -> Point:
        return Point(**data)


@dataclass(frozen=True)
class RightOfWay:
    """Right-of-way edges: offsets across the line [m], positive to the right, ``left_m < right_m``."""

    left_m: float
    right_m: float


class RightOfWaySchema(Schema):
    left_m = FiniteFloat(required=True)
    right_m = FiniteFloat(required=True)

    @validates_schema
    def ordered(self, data: dict[str, Any], **kwargs: Any) -> None:
        if not data["right_m"] > data["left_m"]:
            raise ValidationError("Must be greater than left_m (the right edge lies right of the left edge).",
                                  field_name="right_m")

    @post_load
    def make(self, data: dict[str, Any], **kwargs: Any) -> RightOfWay:
        return RightOfWay(**data)


# --------------------------------------------------------------------------- load cases


MAX_LOAD_CASES = 16
"""Load cases per request (besides the base case, the request as given)."""

LOAD_CASE_POINT_FACTOR = 4
"""(load cases + 1) x points may be at most this many times the per-request point cap."""


@dataclass(frozen=True)
class LoadCase:
    """Other loading of the same cross-section (:func:`models.load_cases.apply_loading`)."""

    id: str
    label: str = ""
    current_scale: float = 1.0
    currents_a: dict[str, float] | None = None
    voltages_kv: dict[str, float] | None = None


class LoadCaseSchema(Schema):
    id = fields.String(required=True, validate=ID_TEXT)
    label = fields.String(load_default="", validate=validate.Length(max=200))
    current_scale = FiniteFloat(load_default=1.0, validate=NON_NEGATIVE)
    currents_a = fields.Dict(keys=fields.String(validate=ID_TEXT), values=FiniteFloat(validate=NON_NEGATIVE),
                             validate=validate.Length(min=1))
    voltages_kv = fields.Dict(keys=fields.String(validate=ID_TEXT), values=FiniteFloat(validate=NON_NEGATIVE),
                              validate=validate.Length(min=1))

    @validates_schema
    def changes_something(self, data: dict[str, Any], **kwargs: Any) -> None:
        if data.get("id") == "base":
            raise ValidationError("'base' names the request as given; choose another id.", field_name="id")
        if data.get("current_scale", 1.0) == 1.0 and not data.get("currents_a") and not data.get("voltages_kv"):
            raise ValidationError("A load case must change the loading: give current_scale, currents_a or "
                                  "voltages_kv.", field_name="current_scale")

    @post_load
    def make(self, data: dict[str, Any], **kwargs: Any) -> LoadCase:
        return LoadCase(**data)


def check_load_cases(cases: list[LoadCase], circuit_ids: list[str], n_points: float, cap: float) -> None:
    """Load cases fit the request: unique ids, known circuits, (cases + 1) x points <= ``cap``.

    :raise marshmallow.ValidationError: naming ``load_cases/<i>/id``, ``.../currents_a/<circuit>``,
        ``.../voltages_kv/<circuit>`` or ``load_cases``.
    """
    errors: dict[int, Any] = {}
    seen: set[str] = set()
    for i, case in enumerate(cases):
        if case.id in seen:
            errors.setdefault(i, {})["id"] = [f"Load case id {case.id!r} is used twice."]
        seen.add(case.id)
        for name in ("currents_a", "voltages_kv"):
            unknown = {cid: [f"No circuit {cid!r} in the request (circuits: {', '.join(circuit_ids)})."]
                       for cid in (getattr(case, name) or {}) if cid not in circuit_ids}
            if unknown:
                errors.setdefault(i, {})[name] = unknown
    if errors:
        raise ValidationError({"load_cases": errors})
    if (len(cases) + 1) * n_points > cap:
        raise ValidationError(f"{len(cases) + 1} cases (with the base case) x {n_points:.0f} points exceed "
                              f"{cap:.0f} evaluated points; use fewer load cases or fewer points.",
                              field_name="load_cases")


# --------------------------------------------------------------------------- limits and the request


@dataclass(frozen=True)
class CustomLimit:
    """A user-defined limit (e.g. a 0.4 µT planning threshold)."""

    id: str
    quantity: str
    value: float
    unit: str
    title: str = ""


class CustomLimitSchema(Schema):
    id = fields.String(required=True, validate=ID_TEXT)
    quantity = fields.String(required=True, validate=validate.OneOf(["E", "B"]))
    value = FiniteFloat(required=True, validate=POSITIVE)
    unit = fields.String(required=True, validate=validate.OneOf(["kV/m", "V/m", "µT", "μT", "uT", "mT", "T"]))
    title = fields.String(load_default="", validate=validate.Length(max=200))

    @post_load
    def make(self, data: dict[str, Any], **kwargs: Any) -> CustomLimit:
        if data["unit"] == "\u03bcT":  # Greek small mu, as keyboards often give it -> micro sign
            data["unit"] = "\u00b5T"
        return CustomLimit(**data)


@dataclass(frozen=True)
class AssessmentRequest:
    """A validated assessment request for a line cross-section."""

    title: str
    reference: str
    frequency_hz: float
    cross_section: CrossSection
    reference_levels: tuple[str, ...] = ()
    custom_limits: tuple[CustomLimit, ...] = ()
    profile: Profile | None = None
    points: tuple[Point, ...] | None = None
    soil_resistivity_ohm_m: float | None = None
    right_of_way: RightOfWay | None = None
    load_cases: tuple[LoadCase, ...] | None = None


class AssessmentBaseSchema(Schema):
    """Fields shared by every kind of assessment request.

    Construct with the request-size limits: ``Schema(max_points=..., max_conductors=...)``.
    """

    title = fields.String(required=True, validate=TEXT)
    reference = fields.String(required=True, validate=TEXT)
    frequency_hz = FiniteFloat(required=True, validate=POSITIVE)
    soil_resistivity_ohm_m = FiniteFloat(validate=POSITIVE)
    reference_levels = fields.List(fields.String(validate=ID_TEXT), load_default=list,
                                   validate=validate.Length(max=32))
    custom_limits = fields.List(fields.Nested(CustomLimitSchema), load_default=list,
                                validate=validate.Length(max=32))

    def __init__(self, *, max_points: int = 20_001, max_conductors: int = 64, **kwargs: Any):
        super().__init__(**kwargs)
        self.max_points = max_points
        self.max_conductors = max_conductors

    @validates_schema
    def some_threshold(self, data: dict[str, Any], **kwargs: Any) -> None:
        if not data["reference_levels"] and not data["custom_limits"]:
            raise ValidationError("Select at least one reference level (or give custom_limits).",
                                  field_name="reference_levels")
        ids = [c.id for c in data["custom_limits"]]
        for i, cid in enumerate(ids):
            if cid in ids[:i] or cid in data["reference_levels"]:
                raise ValidationError({"custom_limits": {i: {"id": [f"Duplicate limit id {cid!r}."]}}})


class CrossSectionAssessmentSchema(AssessmentBaseSchema):
    """Assessment of a line cross-section along a lateral profile or at given points."""

    cross_section = fields.Nested(CrossSectionSchema, required=True)
    profile = fields.Nested(ProfileSchema)
    points = fields.List(fields.Nested(PointSchema), validate=validate.Length(min=1))
    right_of_way = fields.Nested(RightOfWaySchema)
    load_cases = fields.List(fields.Nested(LoadCaseSchema), validate=validate.Length(min=1, max=MAX_LOAD_CASES))

    @validates_schema
    def load_cases_fit(self, data: dict[str, Any], **kwargs: Any) -> None:
        if not data.get("load_cases") or "cross_section" not in data:
            return
        n = (profile_point_count(data["profile"].from_m, data["profile"].to_m, data["profile"].step_m)
             if "profile" in data else len(data.get("points", ())))
        check_load_cases(data["load_cases"], [c.id for c in data["cross_section"].circuits], n,
                         LOAD_CASE_POINT_FACTOR * self.max_points)

    @validates_schema
    def points_and_size(self, data: dict[str, Any], **kwargs: Any) -> None:
        has_profile, has_points = "profile" in data, "points" in data
        if has_profile == has_points:
            raise ValidationError("Give exactly one of profile or points.", field_name="profile")
        if has_profile:
            p = data["profile"]
            n = profile_point_count(p.from_m, p.to_m, p.step_m)
            if n > self.max_points:
                raise ValidationError({"profile": {"step_m": [
                    f"The profile has {n:.0f} points; at most {self.max_points} are allowed per request."]}})
        elif len(data["points"]) > self.max_points:
            raise ValidationError(f"{len(data['points'])} points given; at most {self.max_points} are allowed.",
                                  field_name="points")
        section: CrossSection = data["cross_section"]
        n_cond = sum(len(c.conductors) for c in section.circuits) + len(section.earth_wires)
        if n_cond > self.max_conductors:
            raise ValidationError({"cross_section": [
                f"{n_cond} conductors and earth wires given; at most {self.max_conductors} are allowed."]})

    @post_load
    def make(self, data: dict[str, Any], **kwargs: Any) -> AssessmentRequest:
        data["reference_levels"] = tuple(data["reference_levels"])
        data["custom_limits"] = tuple(data["custom_limits"])
        if "points" in data:
            data["points"] = tuple(data["points"])
        if "load_cases" in data:
            data["load_cases"] = tuple(data["load_cases"])
        return AssessmentRequest(**data)


def load_assessment_request(body: Any, *, max_points: int, max_conductors: int) -> AssessmentRequest:
    """Validate a request body and return the request object.

    :raise marshmallow.ValidationError: with per-field messages (mapped to 422).
    """
    # A route variant is dispatched here, e.g. ``if isinstance(body, dict) and "route" in body``.
    schema = CrossSectionAssessmentSchema(max_points=max_points, max_conductors=max_conductors)
    return schema.load(body)


def to_plain(obj: Any) -> Any:
    """Dataclasses/tuples -> JSON-ready dicts/lists, dropping members that are None.

    The result of ``to_plain(load_assessment_request(body))`` is the normalised
    request: it loads again to an equal request.
    """
    if dataclasses.is_dataclass(obj) and not isinstance(obj, type):
        return {f.name: to_plain(getattr(obj, f.name)) for f in dataclasses.fields(obj)
                if getattr(obj, f.name) is not None}
    if isinstance(obj, (list, tuple)):
        return [to_plain(v) for v in obj]
    return obj


# --------------------------------------------------------------------------- query strings


class ListQuerySchema(Schema):
    """Query of ``GET /v1/assessments``; ``created_*`` are RFC 3339 with a UTC offset (exclusive bounds)."""

    reference = fields.String(validate=TEXT)
    outcome = fields.String(validate=validate.OneOf(["pass", "fail"]))
    created_after = fields.AwareDateTime(format="iso")
    created_before = fields.AwareDateTime(format="iso")
    limit = fields.Integer(validate=validate.Range(min=1, error="Must be at least 1."))
    cursor = fields.String(validate=validate.Length(min=1, max=200))


class ReferenceLevelQuerySchema(Schema):
    """Query of ``GET /v1/reference-levels``."""

    frequency_hz = fields.Float(load_default=50.0, allow_nan=False, validate=POSITIVE)
