"""Load cases: the same line under other loading (what-if studies).

Works on a cross-section (:class:`models.geometry.CrossSection`) and on a route
(:class:`models.route.types.Route`): both hold circuits with ``current_a`` and
``voltage_kv``, conductors with an optional ``current`` phasor, and earth wires.


A load case changes how a line is loaded and, on a route, how far its conductors sag.
Per circuit it can set the balanced current ``current_a`` and the line-to-line
voltage ``voltage_kv``.
``current_scale`` then multiplies every current of the section: circuit currents,
per-conductor current phasors and earth-wire currents.  Conductors with an explicit
current or voltage phasor keep that phasor (scaled by ``current_scale``): the
circuit values do not apply to them, as in the base case.

On a route (conductor temperature and sag) a case may also set the mid-span sag
``sag_m`` of every conductor of a circuit and ``earth_wire_sag_m`` of every earth
wire: the request's route is then the hot case (maximum design temperature, largest
sag, lowest clearance) and the case a cooler one whose sags the user takes from
their own sag-tension (change-of-state) calculation.  The engine does not derive
sag from temperature: that needs the conductor's tension, modulus and expansion
coefficient, which are design inputs.  A conductor given by horizontal tension and
weight takes the case's sag instead (tension and weight are dropped).  A
cross-section has no spans and refuses these members; an underground cable is laid
straight and refuses them too.  The new sag is checked like the route's own
(catenary through both attachments, clear of the ground in every span) when the
case is evaluated; the error then names the case's member.

B is linear in the currents and E in the voltages (superposition, quasi-static
Maxwell equations), so a case that only scales currents scales B by the same factor
and leaves E unchanged; the tests check exactly that against the engine.
"""

from __future__ import annotations

import dataclasses
import math
import re
from collections.abc import Mapping

from collections.abc import Callable, Sequence
from dataclasses import dataclass
from typing import Any, TypeVar

from .errors import EngineInputError, GeometryError, LoadingError, must_be
from .geometry import CurrentPhasor

__all__ = ["LoadCase", "apply_loading", "evaluate_load_cases"]

Line = TypeVar("Line")
"""A cross-section (:class:`models.geometry.CrossSection`) or a route (:class:`models.route.types.Route`)."""


@dataclass(frozen=True)
class LoadCase:
    """Other loading of the same line: see :func:`apply_loading` for what each member does."""

    id: str
    label: str = ""
    current_scale: float = 1.0
    currents_a: dict[str, float] | None = None
    voltages_kv: dict[str, float] | None = None
    sag_m: dict[str, float] | None = None
    earth_wire_sag_m: tuple[float, ...] | None = None

    @property
    def changes_sag(self) -> bool:
        """True when the case sets a conductor or earth-wire sag (a route's cooler case)."""
        return bool(self.sag_m) or self.earth_wire_sag_m is not None


def _non_negative(value: float, field: str) -> float:
    v = float(value)
    if not (math.isfinite(v) and v >= 0.0):
        raise must_be(field, "a finite number >= 0", value, LoadingError)
    return v


def _scaled(current: CurrentPhasor | None, scale: float) -> CurrentPhasor | None:
    return None if current is None else dataclasses.replace(current, magnitude_a=current.magnitude_a * scale)


def apply_loading(
    section: Line,
    *,
    currents_a: Mapping[str, float] | None = None,
    voltages_kv: Mapping[str, float] | None = None,
    current_scale: float = 1.0,
    sag_m: Mapping[str, float] | None = None,
    earth_wire_sag_m: Sequence[float] | None = None,
    field: str = "load_case",
) -> Line:
    """The section with other circuit currents/voltages and all currents scaled (a route: and other sags).

    Parameters
    ----------
    section : CrossSection or Route
        The base case.
    currents_a, voltages_kv : mapping of circuit id to value, optional
        New balanced current [A] / line-to-line voltage [kV] of those circuits.
    current_scale : float
        Factor on every current after the replacements (>= 0).
    sag_m : mapping of circuit id to sag [m], optional
        Route only: new mid-span sag below the chord of every conductor of those
        overhead circuits (>= 0); replaces a tension/weight definition.
    earth_wire_sag_m : sequence of float, optional
        Route only: new mid-span sag of each earth wire [m], one per earth wire, in order.
    field : str
        Prefix of error field names (``f"{field}.currents_a.{id}"``).

    Returns
    -------
    CrossSection or Route
        A new one of the same type; ``section`` is unchanged.

    Raises
    ------
    LoadingError
        A circuit id not in the section, or a negative or non-finite value (field named).
    GeometryError
        A sag on a cross-section (no spans) or on an underground circuit, or an
        ``earth_wire_sag_m`` whose length is not the number of earth wires.

    Examples
    --------
    >>> from models.geometry import Bundle, Circuit, Conductor, CrossSection
    >>> c = Circuit("c1", "overhead", 132.0, 500.0, (Conductor("L1", 0.0, 12.0),), Bundle(0.03))
    >>> apply_loading(CrossSection((c,)), currents_a={"c1": 800.0}, current_scale=1.5).circuits[0].current_a
    1200.0
    """
    section = _with_sags(section, sag_m, earth_wire_sag_m, field)
    ids = [c.id for c in section.circuits]
    scale = _non_negative(current_scale, f"{field}.current_scale")
    new_i = {}
    for name, values in (("currents_a", currents_a or {}), ("voltages_kv", voltages_kv or {})):
        for cid, value in values.items():
            if cid not in ids:
                raise LoadingError(f"{field}.{name}.{cid}",
                                   f"No circuit {cid!r} in the cross-section (circuits: {', '.join(ids)}).")
            new_i[(name, cid)] = _non_negative(value, f"{field}.{name}.{cid}")
    circuits = []
    for c in section.circuits:
        current = new_i.get(("currents_a", c.id), c.current_a)
        voltage = new_i.get(("voltages_kv", c.id), c.voltage_kv)
        conductors = tuple(dataclasses.replace(k, current=_scaled(getattr(k, "current", None), scale))
                           if getattr(k, "current", None) is not None else k for k in c.conductors)
        circuits.append(dataclasses.replace(c, current_a=current * scale, voltage_kv=voltage, conductors=conductors))
    earth_wires = tuple(dataclasses.replace(w, current=_scaled(w.current, scale)) if w.current is not None else w
                        for w in section.earth_wires)
    return dataclasses.replace(section, circuits=tuple(circuits), earth_wires=earth_wires)


def _with_sags(line: Line, sag_m: Mapping[str, float] | None, earth_wire_sag_m: Sequence[float] | None,
               field: str) -> Line:
    """The route with the given circuit and earth-wire sags (``line`` itself when none is given)."""
    if not sag_m and earth_wire_sag_m is None:
        return line
    if not hasattr(line, "supports"):
        name = "sag_m" if sag_m else "earth_wire_sag_m"
        raise GeometryError(f"{field}.{name}", "A cross-section has no spans, so a load case cannot change the "
                                               "sag; give the conductor heights of that case in its own request.")
    by_id = {c.id: c for c in line.circuits}
    new_sag = {}
    for cid, value in (sag_m or {}).items():
        if cid not in by_id:
            raise LoadingError(f"{field}.sag_m.{cid}",
                               f"No circuit {cid!r} in the route (circuits: {', '.join(by_id)}).")
        if by_id[cid].kind == "underground":
            raise GeometryError(f"{field}.sag_m.{cid}", f"Circuit {cid!r} is underground: a cable is laid straight "
                                                        "and has no sag.")
        new_sag[cid] = _non_negative(value, f"{field}.sag_m.{cid}")
    circuits = tuple(dataclasses.replace(c, conductors=tuple(
        dataclasses.replace(k, sag_m=new_sag[c.id], horizontal_tension_n=None, weight_n_per_m=None)
        for k in c.conductors)) if c.id in new_sag else c for c in line.circuits)
    earth_wires = tuple(line.earth_wires)
    if earth_wire_sag_m is not None:
        values = tuple(earth_wire_sag_m)
        if len(values) != len(earth_wires):
            raise must_be(f"{field}.earth_wire_sag_m", f"one sag per earth wire ({len(earth_wires)})",
                          f"{len(values)} values", GeometryError)
        earth_wires = tuple(dataclasses.replace(w, sag_m=_non_negative(v, f"{field}.earth_wire_sag_m[{j}]"))
                            for j, (w, v) in enumerate(zip(earth_wires, values)))
    return dataclasses.replace(line, circuits=circuits, earth_wires=earth_wires)


_WIRE_FIELD = re.compile(r"^route\.(?:circuits\[(\d+)\]\.conductors\[\d+\]|earth_wires\[(\d+)\])\.sag_m$")


def _case_sag_error(exc: EngineInputError, line: Line, case: LoadCase, field: str) -> EngineInputError:
    """A sag error of the loaded route named by the case member that set the sag (else ``exc`` itself)."""
    m = _WIRE_FIELD.match(exc.field or "")
    if m is None:
        return exc
    if m.group(1) is not None:
        cid = line.circuits[int(m.group(1))].id
        if cid not in (case.sag_m or {}):
            return exc
        name, value = f"{field}.sag_m.{cid}", case.sag_m[cid]
    else:
        if case.earth_wire_sag_m is None:
            return exc
        j = int(m.group(2))
        name, value = f"{field}.earth_wire_sag_m[{j}]", case.earth_wire_sag_m[j]
    return type(exc)(name, f"Sag {value!r} m of load case {case.id!r} is not possible on this route: {exc.message}")


def evaluate_load_cases(line: Line, cases: Sequence[LoadCase], evaluate: Callable[[Line], Any], *,
                        field: str = "load_cases") -> list[tuple[LoadCase, Line, Any]]:
    """Each load case applied to ``line`` and evaluated with ``evaluate`` (one call per case, in order).

    ``evaluate`` takes the loaded line and returns its evaluation (for example
    ``lambda s: evaluate_section(s, 50.0, sets)``).  Errors name
    ``f"{field}[i]..."`` (:func:`apply_loading`).

    >>> from models.geometry import Bundle, Circuit, Conductor, CrossSection
    >>> c = Circuit("c1", "overhead", 132.0, 500.0, (Conductor("L1", 0.0, 12.0),), Bundle(0.03))
    >>> [(case.id, s.circuits[0].current_a) for case, s, _ in
    ...  evaluate_load_cases(CrossSection((c,)), [LoadCase("peak", current_scale=2.0)], lambda s: None)]
    [('peak', 1000.0)]
    """
    out = []
    for i, case in enumerate(cases):
        loaded = apply_loading(line, currents_a=case.currents_a, voltages_kv=case.voltages_kv,
                               current_scale=case.current_scale, sag_m=case.sag_m,
                               earth_wire_sag_m=case.earth_wire_sag_m, field=f"{field}[{i}]")
        try:
            result = evaluate(loaded)
        except EngineInputError as exc:
            if not case.changes_sag:
                raise
            raise _case_sag_error(exc, line, case, f"{field}[{i}]") from None
        out.append((case, loaded, result))
    return out
