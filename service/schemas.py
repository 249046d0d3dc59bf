"""Request schemas of a cross-section assessment (marshmallow 4): JSON in, engine dataclasses out.

The schemas check types, required fields, ranges and request-size limits and return
frozen dataclasses (:mod:`models.geometry`, :mod:`models.section_sets` and
:class:`AssessmentRequest`), so no raw dict reaches the engine.  Physical invariants
(conductors clear of the ground and of each other, phase labels, frequency range) are
the engine's checks and run there (:func:`models.sources.validate_cross_section`);
reference-level ids are checked by the catalogue.  What every request shares (title,
limits, load cases, number fields) is in :mod:`service.schema_fields`; the route
request is :mod:`service.route_schemas`.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

from marshmallow import Schema, ValidationError, fields, post_load, validate, validates_schema

from models.geometry import BONDINGS, Bundle, CableScreen, Circuit, Conductor, CrossSection, CurrentPhasor
from models.geometry import EarthWire, VoltagePhasor
from models.load_cases import LoadCase
from models.studies import ClearanceStudy, PhaseArrangementStudy
from models.section_sets import (
    SectionPoint,
    SectionProfile,
    SectionRightOfWay,
    SectionSets,
    profile_point_count,
)

from .schema_fields import (
    CURRENT,
    LOAD_CASE_POINT_FACTOR,
    VOLTAGE,
    ID_TEXT,
    NON_NEGATIVE,
    POSITIVE,
    AssessmentBaseSchema,
    CustomLimit,
    FiniteFloat,
    check_harmonic_work,
    check_harmonics,
    check_load_cases,
    check_unique,
    harmonics_field,
)


# --------------------------------------------------------------------------- cross-section


class CurrentPhasorSchema(Schema):
    magnitude_a = FiniteFloat(required=True, validate=CURRENT)
    angle_deg = FiniteFloat(required=True)

    @post_load
    def make(self, data: dict[str, Any], **kwargs: Any) -> CurrentPhasor:
        return CurrentPhasor(**data)


class VoltagePhasorSchema(Schema):
    magnitude_kv = FiniteFloat(required=True, validate=VOLTAGE)
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


class CableScreenSchema(Schema):
    bonding = fields.String(required=True, validate=validate.OneOf(BONDINGS))
    resistance_ohm_per_km = FiniteFloat(validate=POSITIVE)
    mean_diameter_m = FiniteFloat(validate=POSITIVE)

    @validates_schema
    def data_for_both_ends(self, data: dict[str, Any], **kwargs: Any) -> None:
        if data.get("bonding") != "both_ends":
            return
        missing = {name: ["Required when bonding is both_ends (the screen currents depend on it)."]
                   for name in ("resistance_ohm_per_km", "mean_diameter_m") if name not in data}
        if missing:
            raise ValidationError(missing)

    @post_load
    def make(self, data: dict[str, Any], **kwargs: Any) -> CableScreen:
        return CableScreen(**data)


class CircuitSchema(Schema):
    id = fields.String(required=True, validate=ID_TEXT)
    kind = fields.String(required=True, validate=validate.OneOf(["overhead", "underground"]))
    voltage_kv = FiniteFloat(required=True, validate=VOLTAGE)
    current_a = FiniteFloat(required=True, validate=CURRENT)
    conductors = fields.List(fields.Nested(ConductorSchema), required=True, validate=validate.Length(min=1))
    bundle = fields.Nested(BundleSchema, required=True)
    reverse_sequence = fields.Boolean(load_default=False, truthy={True}, falsy={False})
    angle_offset_deg = FiniteFloat(load_default=0.0)
    screen = fields.Nested(CableScreenSchema)
    harmonics = harmonics_field()

    @validates_schema
    def screen_underground_only(self, data: dict[str, Any], **kwargs: Any) -> None:
        if "screen" in data and data.get("kind") != "underground":
            raise ValidationError("Only an underground circuit has cable screens.", field_name="screen")

    @post_load
    def make(self, data: dict[str, Any], **kwargs: Any) -> Circuit:
        data["conductors"] = tuple(data["conductors"])
        check_harmonics(data)
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
        check_unique([c.id for c in data["circuits"]], lambda i: ("circuits", i, "id"), "circuit id")

    @post_load
    def make(self, data: dict[str, Any], **kwargs: Any) -> CrossSection:
        return CrossSection(tuple(data["circuits"]), tuple(data["earth_wires"]))


# --------------------------------------------------------------------------- evaluation points


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
    def make(self, data: dict[str, Any], **kwargs: Any) -> SectionProfile:
        return SectionProfile(**data)


class PointSchema(Schema):
    offset_m = FiniteFloat(required=True)
    height_m = FiniteFloat(required=True, validate=NON_NEGATIVE)

    @post_load
    def make(self, data: dict[str, Any], **kwargs: Any) -> SectionPoint:
        return SectionPoint(**data)


class RightOfWaySchema(Schema):
    left_m = FiniteFloat(required=True)
    right_m = FiniteFloat(required=True)

    @validates_schema
    def ordered(self, data: dict[str, Any], **kwargs: Any) -> None:
        if not data["right_m"] > data["left_m"]:
            raise ValidationError("Must be greater than left_m (the right edge lies right of the left edge).",
                                  field_name="right_m")

    @post_load
    def make(self, data: dict[str, Any], **kwargs: Any) -> SectionRightOfWay:
        return SectionRightOfWay(**data)


# --------------------------------------------------------------------------- the request


@dataclass(frozen=True)
class AssessmentRequest:
    """A validated assessment request for a line cross-section."""

    title: str
    reference: str
    frequency_hz: float
    cross_section: CrossSection
    reference_levels: tuple[str, ...] = ()
    custom_limits: tuple[CustomLimit, ...] = ()
    profile: SectionProfile | None = None
    points: tuple[SectionPoint, ...] | None = None
    soil_resistivity_ohm_m: float | None = None
    right_of_way: SectionRightOfWay | None = None
    load_cases: tuple[LoadCase, ...] | None = None
    study: ClearanceStudy | PhaseArrangementStudy | None = None
    """Last, so that requests without a study keep their normalised ``input`` unchanged."""

    @property
    def line(self) -> CrossSection:
        """The line as given (base loading)."""
        return self.cross_section

    @property
    def sets(self) -> SectionSets:
        """Where the fields are evaluated."""
        return SectionSets(self.profile, self.points, self.right_of_way)

    @property
    def point_counts(self) -> dict[str, float]:
        """Points per evaluation set."""
        n = (profile_point_count(self.profile.from_m, self.profile.to_m, self.profile.step_m)
             if self.profile is not None else len(self.points or ()))
        return {"points": n, "right_of_way": 2 if self.right_of_way is not None else 0}


class CrossSectionAssessmentSchema(AssessmentBaseSchema):
    """Assessment of a line cross-section along a lateral profile or at given points."""

    cross_section = fields.Nested(CrossSectionSchema, required=True)
    profile = fields.Nested(ProfileSchema)
    points = fields.List(fields.Nested(PointSchema), validate=validate.Length(min=1))
    right_of_way = fields.Nested(RightOfWaySchema)

    @validates_schema
    def load_cases_fit(self, data: dict[str, Any], **kwargs: Any) -> None:
        if not data.get("load_cases") or "cross_section" not in data:
            return
        n = (profile_point_count(data["profile"].from_m, data["profile"].to_m, data["profile"].step_m)
             if "profile" in data else len(data.get("points", ())))
        check_load_cases(data["load_cases"], data["cross_section"].circuits, n,
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
                    f"The profile has {n:.0f} points; at most {self.max_points} are allowed per request (limit MAX_POINTS)."]}})
        elif len(data["points"]) > self.max_points:
            raise ValidationError(f"{len(data['points'])} points given; at most {self.max_points} are allowed (limit MAX_POINTS).",
                                  field_name="points")
        section: CrossSection = data["cross_section"]
        self.check_conductor_count(section.circuits, section.earth_wires, "cross_section")
        n = profile_point_count(data["profile"].from_m, data["profile"].to_m, data["profile"].step_m) \
            if has_profile else len(data["points"])
        check_harmonic_work(section.circuits, len(data.get("load_cases") or ()), n + 2,
                            LOAD_CASE_POINT_FACTOR * self.max_points, "cross_section")

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
    schema = CrossSectionAssessmentSchema(max_points=max_points, max_conductors=max_conductors)
    return schema.load(body)
