"""Load cases: the same line under other loading (what-if studies).

Works on a cross-section (:class:`models.geometry.CrossSection`) and on a route
(:class:`models.route.types.Route`): both hold circuits with ``current_a`` and
``voltage_kv``, conductors with an optional ``current`` phasor, and earth wires.


A load case changes how a line is loaded, never its geometry.  Per circuit it can
set the balanced current ``current_a`` and the line-to-line voltage ``voltage_kv``.
``current_scale`` then multiplies every current of the section: circuit currents,
per-conductor current phasors and earth-wire currents.  Conductors with an explicit
current or voltage phasor keep that phasor (scaled by ``current_scale``): the
circuit values do not apply to them, as in the base case.

B is linear in the currents and E in the voltages (superposition, quasi-static
Maxwell equations), so a case that only scales currents scales B by the same factor
and leaves E unchanged; the tests check exactly that against the engine.
"""

from __future__ import annotations

import dataclasses
import math
from collections.abc import Mapping

from collections.abc import Callable, Sequence
from dataclasses import dataclass
from typing import Any, TypeVar

from .errors import LoadingError, must_be
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
    field: str = "load_case",
) -> Line:
    """The section with other circuit currents/voltages and all currents scaled.

    Parameters
    ----------
    section : CrossSection or Route
        The base case.
    currents_a, voltages_kv : mapping of circuit id to value, optional
        New balanced current [A] / line-to-line voltage [kV] of those circuits.
    current_scale : float
        Factor on every current after the replacements (>= 0).
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

    Examples
    --------
    >>> from models.geometry import Bundle, Circuit, Conductor, CrossSection
    >>> c = Circuit("c1", "overhead", 132.0, 500.0, (Conductor("L1", 0.0, 12.0),), Bundle(0.03))
    >>> apply_loading(CrossSection((c,)), currents_a={"c1": 800.0}, current_scale=1.5).circuits[0].current_a
    1200.0
    """
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
                               current_scale=case.current_scale, field=f"{field}[{i}]")
        out.append((case, loaded, evaluate(loaded)))
    return out
