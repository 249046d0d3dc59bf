"""What every assessment request schema shares: number fields, id checks, limits, load cases.

The geometry schemas (:mod:`service.schemas` for a cross-section,
:mod:`service.route_schemas` for a route) build on these.  Numbers must be JSON
numbers: strings, booleans, NaN and ±Infinity are refused (Python's JSON parser
accepts the bare tokens ``NaN`` and ``Infinity``).  Every schema keeps marshmallow's
default ``unknown=RAISE``.

Error messages never contain ``{`` or ``}``: marshmallow formats messages with
``str.format`` and a brace would turn into a placeholder (a 500 instead of a 422).
"""

from __future__ import annotations

import dataclasses
from collections.abc import Callable, Iterable, Mapping
from dataclasses import dataclass
from typing import Any

from marshmallow import Schema, ValidationError, fields, post_load, validate, validates_schema

from models.catalogue import UNIT_TO_SI
from models.geometry import Harmonic
from models.harmonics import MAX_ORDER
from models.load_cases import LoadCase
from models.studies import RANK_BY, STUDY_KINDS, ClearanceStudy, PhaseArrangementStudy

POSITIVE = validate.Range(min=0, min_inclusive=False, error="Must be greater than 0.")
NON_NEGATIVE = validate.Range(min=0, error="Must be greater than or equal to 0.")
TEXT = validate.Length(min=1, max=200)
ID_TEXT = validate.Length(min=1, max=64)
UNITS = validate.OneOf(list(UNIT_TO_SI))
"""Units a limit may be given in (the catalogue's; the unit decides E or B)."""

MAX_LOAD_CASES = 16
"""Load cases per request (besides the base case, the request as given)."""

LOAD_CASE_POINT_FACTOR = 4
"""(load cases + 1) x points may be at most this many times the per-request point cap."""


MAX_MAGNITUDE = 1e15
"""Largest magnitude of any number in a request: far beyond every physical input (lengths in m,
coordinates, currents in A, voltages in kV), and small enough that squares and sums of
squares in the engine never overflow."""

MAX_CURRENT_A = 100_000.0
"""Largest phase (or earth-wire) current [A]: line currents are a few kA (common practice)."""
MAX_VOLTAGE_KV = 2_000.0
"""Largest line-to-line voltage [kV]: the highest AC transmission voltages are about 1,200 kV (common practice)."""
CURRENT = validate.Range(min=0, max=MAX_CURRENT_A, error="Must be from 0 to 100000 A.")
VOLTAGE = validate.Range(min=0, max=MAX_VOLTAGE_KV, error="Must be from 0 to 2000 kV.")


class FiniteFloat(fields.Float):
    """A JSON number that is finite and at most :data:`MAX_MAGNITUDE` in magnitude: no strings,
    booleans, NaN or infinities."""

    default_error_messages = {"invalid": "Not a valid number.",
                              "special": "Must be a finite number (NaN and Infinity are not allowed).",
                              "huge": "Must be at most 1e15 in magnitude."}

    def __init__(self, **kwargs: Any):
        kwargs.setdefault("allow_nan", False)
        super().__init__(**kwargs)

    def _deserialize(self, value: Any, attr: str | None, data: Mapping[str, Any] | None, **kwargs: Any) -> float:
        if isinstance(value, (str, bool)):
            raise self.make_error("invalid")
        number = super()._deserialize(value, attr, data, **kwargs)
        if abs(number) > MAX_MAGNITUDE:
            raise self.make_error("huge")
        return number


def nested_error(path: Iterable[Any], message: str) -> dict:
    """``{"a": {0: {"id": [message]}}}`` for ``path = ("a", 0, "id")``: a marshmallow error at that field."""
    out: Any = [message]
    for key in reversed(tuple(path)):
        out = {key: out}
    return out


def check_unique(values: Iterable[str], path: Callable[[int], Iterable[Any]], what: str,
                 taken: Iterable[str] = ()) -> None:
    """Refuse a value seen before (or in ``taken``) with a 422 at ``path(i)``: "Duplicate <what> 'x'."."""
    seen = set(taken)
    for i, value in enumerate(values):
        if value in seen:
            raise ValidationError(nested_error(path(i), f"Duplicate {what} {value!r}."))
        seen.add(value)


def check_lon_lat(x: float, y: float, path: Iterable[Any], y_path: Iterable[Any] | None = None) -> None:
    """Refuse a longitude outside [-180, 180] or a latitude outside [-90, 90] degrees (RFC 7946).

    The error names ``path`` (``y_path`` for the latitude when given).
    """
    if not -180.0 <= x <= 180.0:
        raise ValidationError(nested_error(path, "Longitude must be within [-180, 180] degrees."))
    if not -90.0 <= y <= 90.0:
        raise ValidationError(nested_error(path if y_path is None else y_path,
                                           "Latitude must be within [-90, 90] degrees."))


# --------------------------------------------------------------------------- load cases


class LoadCaseSchema(Schema):
    id = fields.String(required=True, validate=ID_TEXT)
    label = fields.String(load_default="", validate=validate.Length(max=200))
    current_scale = FiniteFloat(load_default=1.0, validate=validate.Range(min=0, max=100, error="Must be from 0 to 100."))
    currents_a = fields.Dict(keys=fields.String(validate=ID_TEXT), values=FiniteFloat(validate=CURRENT),
                             validate=validate.Length(min=1))
    voltages_kv = fields.Dict(keys=fields.String(validate=ID_TEXT), values=FiniteFloat(validate=VOLTAGE),
                              validate=validate.Length(min=1))
    sag_m = fields.Dict(keys=fields.String(validate=ID_TEXT), values=FiniteFloat(validate=NON_NEGATIVE),
                        validate=validate.Length(min=1))
    earth_wire_sag_m = fields.List(FiniteFloat(validate=NON_NEGATIVE), validate=validate.Length(min=1))

    @validates_schema
    def changes_something(self, data: dict[str, Any], **kwargs: Any) -> None:
        if data.get("id") == "base":
            raise ValidationError("'base' names the request as given; choose another id.", field_name="id")
        if (data.get("current_scale", 1.0) == 1.0
                and not any(data.get(k) for k in ("currents_a", "voltages_kv", "sag_m", "earth_wire_sag_m"))):
            raise ValidationError("A load case must change the loading or the sag: give current_scale, currents_a, "
                                  "voltages_kv, sag_m or earth_wire_sag_m.", field_name="current_scale")

    @post_load
    def make(self, data: dict[str, Any], **kwargs: Any) -> LoadCase:
        if "earth_wire_sag_m" in data:
            data["earth_wire_sag_m"] = tuple(data["earth_wire_sag_m"])
        return LoadCase(**data)


def check_load_cases(cases: list[LoadCase], circuits: Iterable[Any], n_points: float, cap: float, *,
                     earth_wires: int | None = None) -> None:
    """Load cases fit the request: unique ids, known circuits, sags only where there are spans,
    (cases + 1) x points <= ``cap``.

    ``circuits`` are the request's circuits (``id`` and ``kind``); ``earth_wires`` is a
    route's number of earth wires, ``None`` for a cross-section (no spans: a case's sag is refused).

    :raise marshmallow.ValidationError: naming ``load_cases/<i>/id``, ``.../currents_a/<circuit>``,
        ``.../voltages_kv/<circuit>``, ``.../sag_m[/<circuit>]``, ``.../earth_wire_sag_m`` or ``load_cases``.
    """
    kinds = {c.id: c.kind for c in circuits}
    circuit_ids = list(kinds)
    errors: dict[int, Any] = {}
    seen: set[str] = set()
    for i, case in enumerate(cases):
        if case.id in seen:
            errors.setdefault(i, {})["id"] = [f"Load case id {case.id!r} is used twice."]
        seen.add(case.id)
        for name in ("currents_a", "voltages_kv", "sag_m"):
            unknown = {cid: [f"No circuit {cid!r} in the request (circuits: {', '.join(circuit_ids)})."]
                       for cid in (getattr(case, name) or {}) if cid not in circuit_ids}
            if unknown:
                errors.setdefault(i, {})[name] = unknown
        errors_i = _sag_errors(case, kinds, earth_wires)
        if errors_i:
            errors.setdefault(i, {}).update(errors_i)
    if errors:
        raise ValidationError({"load_cases": errors})
    if (len(cases) + 1) * n_points > cap:
        raise ValidationError(f"{len(cases) + 1} cases (with the base case) x {n_points:.0f} points exceed "
                              f"{cap:.0f} evaluated points; use fewer load cases or fewer points.",
                              field_name="load_cases")


def _sag_errors(case: LoadCase, kinds: Mapping[str, str], earth_wires: int | None) -> dict[str, Any]:
    """Messages for a case's ``sag_m`` / ``earth_wire_sag_m`` that the geometry cannot take (unknown ids aside)."""
    out: dict[str, Any] = {}
    if earth_wires is None:
        for name in ("sag_m", "earth_wire_sag_m"):
            if getattr(case, name):
                out[name] = ["A cross-section has no spans, so a load case cannot change the sag; give the "
                             "conductor heights of that case in its own request (or use a route)."]
        return out
    underground = {cid: [f"Circuit {cid!r} is underground: a cable is laid straight and has no sag."]
                   for cid in (case.sag_m or {}) if kinds.get(cid) == "underground"}
    if underground:
        out["sag_m"] = underground
    if case.earth_wire_sag_m is not None and len(case.earth_wire_sag_m) != earth_wires:
        out["earth_wire_sag_m"] = [f"Give one sag per earth wire of the route ({earth_wires}); "
                                   f"received {len(case.earth_wire_sag_m)}."]
    return out


def load_cases_field() -> fields.List:
    """The ``load_cases`` member of a request body."""
    return fields.List(fields.Nested(LoadCaseSchema), validate=validate.Length(min=1, max=MAX_LOAD_CASES))


# --------------------------------------------------------------------------- harmonics


FRACTION = validate.Range(min=0, max=1, error="Must be from 0 to 1 (a fraction of the fundamental).")


class HarmonicSchema(Schema):
    order = fields.Integer(required=True, strict=True, validate=validate.Range(
        min=2, max=MAX_ORDER, error=f"Must be an integer from 2 to {MAX_ORDER} (1 is the fundamental)."))
    current_fraction = FiniteFloat(load_default=0.0, validate=FRACTION)
    voltage_fraction = FiniteFloat(load_default=0.0, validate=FRACTION)

    @post_load
    def make(self, data: dict[str, Any], **kwargs: Any) -> Harmonic:
        return Harmonic(**data)


def harmonics_field() -> fields.List:
    """The ``harmonics`` member of a circuit (both geometries): unique orders, checked by :func:`check_harmonics`."""
    return fields.List(fields.Nested(HarmonicSchema), validate=validate.Length(min=1, max=MAX_ORDER - 1))


def check_harmonics(data: dict[str, Any]) -> None:
    """A circuit's harmonic orders are unique (422 at ``harmonics/<k>/order``); the list becomes a tuple."""
    if "harmonics" in data:
        check_unique([str(h.order) for h in data["harmonics"]], lambda k: ("harmonics", k, "order"),
                     "harmonic order")
        data["harmonics"] = tuple(data["harmonics"])


def check_harmonic_work(circuits: Iterable[Any], cases: int, n_points: float, cap: float, member: str) -> None:
    """(harmonic orders + 1) x (load cases + 1) x points <= ``cap`` (422 at ``<member>/circuits/<i>/harmonics``)."""
    circuits = list(circuits)
    orders = {h.order for c in circuits for h in (c.harmonics or ())}
    if not orders:
        return
    total = (len(orders) + 1) * (cases + 1) * n_points
    if total > cap:
        first = next(i for i, c in enumerate(circuits) if c.harmonics)
        raise ValidationError(nested_error((member, "circuits", first, "harmonics"), (
            f"{len(orders) + 1} frequencies x {cases + 1} cases x {n_points:.0f} points = {total:.0f} evaluated "
            f"points exceed {cap:.0f}; give fewer harmonic orders, load cases or points.")))


# --------------------------------------------------------------------------- studies


class ClearanceStudySchema(Schema):
    kind = fields.String(required=True, validate=validate.Equal("clearance"))
    threshold = fields.String(required=True, validate=ID_TEXT)
    quantity = fields.String(validate=validate.OneOf(["E", "B"]))
    beyond_offset_m = FiniteFloat(allow_none=True, validate=NON_NEGATIVE)
    height_m = FiniteFloat(validate=NON_NEGATIVE)
    min_clearance_m = FiniteFloat(required=True, validate=POSITIVE)
    max_clearance_m = FiniteFloat(required=True, validate=POSITIVE)
    tolerance_m = FiniteFloat(load_default=0.01, validate=validate.Range(
        min=0, max=1, min_inclusive=False, error="Must be greater than 0 and at most 1 m."))

    @validates_schema
    def ordered(self, data: dict[str, Any], **kwargs: Any) -> None:
        if "min_clearance_m" in data and "max_clearance_m" in data and \
                not data["max_clearance_m"] > data["min_clearance_m"]:
            raise ValidationError("Must be greater than min_clearance_m.", field_name="max_clearance_m")

    @post_load
    def make(self, data: dict[str, Any], **kwargs: Any) -> ClearanceStudy:
        return ClearanceStudy(**data)


class PhaseArrangementStudySchema(Schema):
    kind = fields.String(required=True, validate=validate.Equal("phase_arrangement"))
    rank_by = fields.String(load_default="b_max", validate=validate.OneOf(RANK_BY))

    @post_load
    def make(self, data: dict[str, Any], **kwargs: Any) -> PhaseArrangementStudy:
        return PhaseArrangementStudy(**data)


STUDY_SCHEMAS = {"clearance": ClearanceStudySchema, "phase_arrangement": PhaseArrangementStudySchema}


class StudyField(fields.Field):
    """The ``study`` member: an object whose ``kind`` chooses its schema (:data:`STUDY_SCHEMAS`)."""

    def _deserialize(self, value: Any, attr: str | None, data: Mapping[str, Any] | None, **kwargs: Any) -> Any:
        if not isinstance(value, dict):
            raise ValidationError("Must be an object with a kind.")
        kind = value.get("kind")
        if kind not in STUDY_SCHEMAS:
            raise ValidationError({"kind": [f"Must be one of: {', '.join(STUDY_KINDS)}."]})
        return STUDY_SCHEMAS[kind]().load(value)


# --------------------------------------------------------------------------- limits and the base request


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
    unit = fields.String(required=True, validate=UNITS)
    title = fields.String(load_default="", validate=validate.Length(max=200))

    @post_load
    def make(self, data: dict[str, Any], **kwargs: Any) -> CustomLimit:
        if data["unit"] == "\u03bcT":  # Greek small mu, as keyboards often give it -> micro sign
            data["unit"] = "\u00b5T"
        return CustomLimit(**data)


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
    load_cases = load_cases_field()
    study = StudyField()

    def __init__(self, *, max_points: int = 20_001, max_conductors: int = 64, **kwargs: Any):
        super().__init__(**kwargs)
        self.max_points = max_points
        self.max_conductors = max_conductors

    @validates_schema
    def some_threshold(self, data: dict[str, Any], **kwargs: Any) -> None:
        if not data["reference_levels"] and not data["custom_limits"]:
            raise ValidationError("Select at least one reference level (or give custom_limits).",
                                  field_name="reference_levels")
        check_unique([c.id for c in data["custom_limits"]], lambda i: ("custom_limits", i, "id"), "limit id",
                     taken=data["reference_levels"])
        study = data.get("study")
        if isinstance(study, ClearanceStudy):
            ids = list(data["reference_levels"]) + [c.id for c in data["custom_limits"]]
            if study.threshold not in ids:
                raise ValidationError(nested_error(("study", "threshold"), "Must be one of the request's reference "
                                                   f"levels or custom limit ids ({', '.join(ids)})."))

    def check_conductor_count(self, circuits: Iterable[Any], earth_wires: Iterable[Any], member: str) -> None:
        """Refuse more conductors and earth wires than ``max_conductors`` (422 at ``member``)."""
        n_cond = sum(len(c.conductors) for c in circuits) + len(tuple(earth_wires))
        if n_cond > self.max_conductors:
            raise ValidationError({member: [
                f"{n_cond} conductors and earth wires given; at most {self.max_conductors} are allowed (limit MAX_CONDUCTORS)."]})


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
