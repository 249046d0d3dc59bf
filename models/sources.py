"""From a :class:`~models.geometry.CrossSection` to field sources.

This module turns the input description into flat arrays the kernels use:

* phase labels -> phase angles (L1/L2/L3, A/B/C, R/S/T, R/Y/B -> 0, -120, +120 deg;
  ``N`` neutral), with the circuit's ``reverse_sequence`` and ``angle_offset_deg``;
* bundles -> explicit subconductor positions (convention of
  :class:`models.geometry.Bundle`) and the equivalent bundle radius;
* rms current and voltage-to-ground phasors per subconductor;
* physical checks (:func:`validate_cross_section`) raising typed errors whose
  ``field`` is a path such as ``"cross_section.circuits[0].conductors[2].height_m"``.
"""

from __future__ import annotations

import cmath
import math
from dataclasses import dataclass

import numpy as np

from .errors import EngineInputError, GeometryError, LoadingError, must_be
from .geometry import BONDINGS, Bundle, CableScreen, Circuit, CrossSection
from .units import SQRT3, V_PER_KV

#: Lowest and highest frequency the quasi-static engine accepts [Hz].
FREQUENCY_RANGE_HZ = (1.0, 3000.0)

#: Phase-label schemes in use in the trade (common practice).  Each maps the
#: label to its angle [deg] in positive sequence.  ``B`` means -120 deg in A/B/C
#: but +120 deg in R/Y/B; a circuit's labels must therefore fit one scheme.
PHASE_SCHEMES: dict[str, dict[str, float]] = {
    "L1/L2/L3": {"L1": 0.0, "L2": -120.0, "L3": 120.0},
    "A/B/C": {"A": 0.0, "B": -120.0, "C": 120.0},
    "R/S/T": {"R": 0.0, "S": -120.0, "T": 120.0},
    "R/Y/B": {"R": 0.0, "Y": -120.0, "B": 120.0},
}

NEUTRAL_LABEL = "N"

_ALL_LABELS = sorted({label for scheme in PHASE_SCHEMES.values() for label in scheme} | {NEUTRAL_LABEL})


def circuit_phase_angles_deg(circuit: Circuit, field: str = "circuit") -> list[float | None]:
    """Phase angle of every conductor of a circuit.

    Parameters
    ----------
    circuit : Circuit
    field : str
        Path of the circuit in the input, used in error fields.

    Returns
    -------
    list of float or None
        Angle [deg] per conductor, including ``reverse_sequence`` (labels 2 and 3
        swap, i.e. the sign of the +-120 deg flips) and ``angle_offset_deg``;
        ``None`` for a neutral.

    Raises
    ------
    LoadingError
        Unknown label (field ``...conductors[k].phase``) or labels that mix
        schemes or cannot be resolved to one scheme.

    Examples
    --------
    >>> from models.geometry import Bundle, Circuit, Conductor
    >>> c = Circuit("c1", "overhead", 400.0, 1000.0,
    ...             (Conductor("R", -8, 20), Conductor("Y", 0, 20), Conductor("B", 8, 20)),
    ...             Bundle(0.03))
    >>> circuit_phase_angles_deg(c)
    [0.0, -120.0, 120.0]
    """
    labels = []
    for k, conductor in enumerate(circuit.conductors):
        raw = conductor.phase
        label = raw.strip().upper() if isinstance(raw, str) else raw
        if label not in _ALL_LABELS:
            raise LoadingError(
                f"{field}.conductors[{k}].phase",
                f"Input {field}.conductors[{k}].phase must be one of {', '.join(_ALL_LABELS)}; "
                f"instead received {raw!r}.",
            )
        labels.append(label)
    used = {label for label in labels if label != NEUTRAL_LABEL}
    schemes = [scheme for scheme in PHASE_SCHEMES.values() if used <= scheme.keys()]
    if used and not schemes:
        raise LoadingError(
            f"{field}.conductors",
            f"Input {field}.conductors phase labels must come from one scheme "
            f"({'; '.join(PHASE_SCHEMES)}); instead received {sorted(used)!r}.",
        )
    sign = -1.0 if circuit.reverse_sequence else 1.0
    angles: list[float | None] = []
    for k, label in enumerate(labels):
        if label == NEUTRAL_LABEL:
            angles.append(None)
            continue
        candidates = {scheme[label] for scheme in schemes}
        if len(candidates) != 1:
            raise LoadingError(
                f"{field}.conductors[{k}].phase",
                f"Input {field}.conductors[{k}].phase must be unambiguous (B is -120 deg in A/B/C "
                f"but +120 deg in R/Y/B; add the other labels of the circuit or use L1/L2/L3); "
                f"instead received {circuit.conductors[k].phase!r}.",
            )
        angles.append(sign * candidates.pop() + circuit.angle_offset_deg)
    return angles


def bundle_radius_m(bundle: Bundle) -> float:
    """Radius A of the circle through the subconductor centres [m].

    ``A = s / (2 sin(pi / n))`` (common practice), 0 for a single conductor.

    >>> round(bundle_radius_m(Bundle(0.0286, 2, 0.4)), 6)
    0.2
    """
    if bundle.count <= 1:
        return 0.0
    return bundle.spacing_m / (2.0 * math.sin(math.pi / bundle.count))


def subconductor_offsets_m(bundle: Bundle) -> np.ndarray:
    """Subconductor centres relative to the bundle centre [m], shape (count, 2).

    Angles ``pi/n - pi/2 + 2 pi k / n`` on the bundle circle (the convention of
    :class:`models.geometry.Bundle`: one flat side at the bottom).

    Examples
    --------
    >>> subconductor_offsets_m(Bundle(0.03, 2, 0.4)).round(12) + 0.0
    array([[ 0.2,  0. ],
           [-0.2,  0. ]])
    """
    return np.array(_subconductor_offsets(bundle), dtype=float)


def _subconductor_offsets(bundle: Bundle) -> list[tuple[float, float]]:
    """Plain-float version of :func:`subconductor_offsets_m` (a few points: no numpy overhead)."""
    n = bundle.count
    if n <= 1:
        return [(0.0, 0.0)]
    a = bundle_radius_m(bundle)
    angles = [math.pi / n - math.pi / 2.0 + 2.0 * math.pi * k / n for k in range(n)]
    return [(a * math.cos(t), a * math.sin(t)) for t in angles]


def equivalent_bundle_radius_m(bundle: Bundle) -> float:
    """Equivalent radius of a bundle for potential coefficients [m].

    ``r_eq = (n r A^(n-1))^(1/n)`` with subconductor radius r and bundle radius A
    (Deno & Zaffanella [1]_, from memory).  The
    engine itself models subconductors explicitly; this is offered for reports
    and as the cross-check used in the tests.

    References
    ----------
    .. [1] J. D. Deno and L. E. Zaffanella, "Field effects of overhead transmission
       lines and stations", ch. 8 in *Transmission Line Reference Book, 345 kV and
       Above*, 2nd ed., EPRI, 1982.

    Examples
    --------
    >>> round(equivalent_bundle_radius_m(Bundle(0.0286, 2, 0.40)) * 1e3, 2)   # mm
    75.63
    """
    r = bundle.subconductor_diameter_m / 2.0
    n = bundle.count
    if n <= 1:
        return r
    return (n * r * bundle_radius_m(bundle) ** (n - 1)) ** (1.0 / n)


@dataclass(frozen=True)
class Sources:
    """Flat arrays of every physical wire (subconductor or earth wire) in a section.

    Attributes
    ----------
    x_m, y_m, radius_m : ndarray, shape (m,)
        Wire centre offset, height [m] and radius [m].
    current_a : complex ndarray, shape (m,)
        rms current phasor per wire [A] (a bundle's current shared equally).
    voltage_v : complex ndarray, shape (m,)
        rms voltage-to-ground phasor [V] (earth wires, neutrals: 0).
    overhead : bool ndarray, shape (m,)
        True for overhead conductors and earth wires; False for underground cables
        (no electric field outside the screen, no earth-return image).
    fields : tuple of str
        Input path of each wire's conductor, e.g. ``"cross_section.earth_wires[0]"``.
    circuit_index, conductor_index : int ndarray, shape (m,)
        Index of the wire's circuit and of its conductor in that circuit (-1 for earth
        wires; earth wire j has ``conductor_index`` j).
    """

    x_m: np.ndarray
    y_m: np.ndarray
    radius_m: np.ndarray
    current_a: np.ndarray
    voltage_v: np.ndarray
    overhead: np.ndarray
    fields: tuple[str, ...]
    circuit_index: np.ndarray
    conductor_index: np.ndarray


def _phasor(magnitude: float, angle_deg: float) -> complex:
    return cmath.rect(magnitude, math.radians(angle_deg))


def build_sources(section: CrossSection, field: str = "cross_section") -> Sources:
    """Expand a cross-section into one entry per physical wire.

    Currents: circuit ``current_a`` at the phase angle, or the conductor's
    ``current`` override, used as given (absolute angle, no sequence or offset
    applied).  Voltages: ``voltage_kv / sqrt(3)`` at the phase angle, or the
    ``voltage_to_ground`` override (as given).  Neutrals carry no current and sit
    at 0 V unless overridden; earth wires sit at 0 V and carry their ``current``
    if given.  Call :func:`validate_cross_section` first.

    Parameters
    ----------
    section : CrossSection
    field : str
        Path prefix for error fields.

    Returns
    -------
    Sources

    Examples
    --------
    >>> from models.geometry import Bundle, Circuit, Conductor, CrossSection
    >>> c = Circuit("c1", "overhead", 400.0, 1000.0,
    ...             (Conductor("L1", -8, 20), Conductor("L2", 0, 20), Conductor("L3", 8, 20)),
    ...             Bundle(0.03, 2, 0.4))
    >>> s = build_sources(CrossSection((c,)))
    >>> len(s.x_m), round(float(abs(s.current_a[0])), 6)
    (6, 500.0)
    """
    xs, ys, rs, currents, voltages, overhead, fields = [], [], [], [], [], [], []
    circuit_index, conductor_index = [], []
    for i, circuit in enumerate(section.circuits):
        cpath = f"{field}.circuits[{i}]"
        angles = circuit_phase_angles_deg(circuit, cpath)
        rel = _subconductor_offsets(circuit.bundle)
        n_sub = len(rel)
        r_sub = circuit.bundle.subconductor_diameter_m / 2.0
        v_phase = circuit.voltage_kv * V_PER_KV / SQRT3
        for k, (conductor, angle) in enumerate(zip(circuit.conductors, angles)):
            if conductor.current is not None:
                current = _phasor(conductor.current.magnitude_a, conductor.current.angle_deg)
            elif angle is None:
                current = 0j
            else:
                current = _phasor(circuit.current_a, angle)
            if conductor.voltage_to_ground is not None:
                voltage = _phasor(conductor.voltage_to_ground.magnitude_kv * V_PER_KV,
                                  conductor.voltage_to_ground.angle_deg)
            elif angle is None:
                voltage = 0j
            else:
                voltage = _phasor(v_phase, angle)
            for dx, dy in rel:
                xs.append(conductor.offset_m + dx)
                ys.append(conductor.height_m + dy)
                rs.append(r_sub)
                currents.append(current / n_sub)
                voltages.append(voltage)
                overhead.append(circuit.kind == "overhead")
                fields.append(f"{cpath}.conductors[{k}]")
                circuit_index.append(i)
                conductor_index.append(k)
    for j, wire in enumerate(section.earth_wires):
        xs.append(wire.offset_m)
        ys.append(wire.height_m)
        rs.append(wire.diameter_m / 2.0)
        currents.append(0j if wire.current is None else _phasor(wire.current.magnitude_a, wire.current.angle_deg))
        voltages.append(0j)
        overhead.append(True)
        fields.append(f"{field}.earth_wires[{j}]")
        circuit_index.append(-1)
        conductor_index.append(j)
    return Sources(
        x_m=np.asarray(xs, dtype=float),
        y_m=np.asarray(ys, dtype=float),
        radius_m=np.asarray(rs, dtype=float),
        current_a=np.asarray(currents, dtype=complex),
        voltage_v=np.asarray(voltages, dtype=complex),
        overhead=np.asarray(overhead, dtype=bool),
        fields=tuple(fields),
        circuit_index=np.asarray(circuit_index, dtype=np.int64),
        conductor_index=np.asarray(conductor_index, dtype=np.int64),
    )


# --------------------------------------------------------------------------- validation


def check_finite(path: str, value: object, constraint: str, cls: type[EngineInputError]) -> float:
    """Return ``value`` as float, or raise if it is not a finite real number."""
    if isinstance(value, bool) or not isinstance(value, (int, float, np.integer, np.floating)):
        raise must_be(path, f"a finite number, {constraint}", value, cls)
    x = float(value)
    if not math.isfinite(x):
        raise must_be(path, f"a finite number, {constraint}", value, cls)
    return x


def validate_frequency(frequency_hz: float, field: str = "frequency_hz") -> float:
    """Check a frequency against :data:`FREQUENCY_RANGE_HZ` (quasi-static range).

    >>> validate_frequency(50)
    50.0
    """
    lo, hi = FREQUENCY_RANGE_HZ
    f = check_finite(field, frequency_hz, f"between {lo:g} and {hi:g} Hz", LoadingError)
    if not lo <= f <= hi:
        raise must_be(field, f"between {lo:g} and {hi:g} Hz", frequency_hz, LoadingError)
    return f


def validate_soil_resistivity(rho_ohm_m: float | None, field: str = "soil_resistivity_ohm_m") -> float | None:
    """Check an optional soil resistivity (finite, > 0) [ohm m].

    >>> validate_soil_resistivity(100.0)
    100.0
    """
    if rho_ohm_m is None:
        return None
    rho = check_finite(field, rho_ohm_m, "> 0 ohm m", LoadingError)
    if rho <= 0:
        raise must_be(field, "> 0 ohm m", rho_ohm_m, LoadingError)
    return rho


def check_phasor(path: str, phasor, magnitude_name: str) -> None:
    if phasor is None:
        return
    mag = check_finite(f"{path}.{magnitude_name}", getattr(phasor, magnitude_name), ">= 0", LoadingError)
    if mag < 0:
        raise must_be(f"{path}.{magnitude_name}", ">= 0", mag, LoadingError)
    check_finite(f"{path}.angle_deg", phasor.angle_deg, "in degrees", LoadingError)


def _check_bundle(path: str, bundle: Bundle) -> None:
    d = check_finite(f"{path}.subconductor_diameter_m", bundle.subconductor_diameter_m, "> 0 m", GeometryError)
    if d <= 0:
        raise must_be(f"{path}.subconductor_diameter_m", "> 0 m", bundle.subconductor_diameter_m, GeometryError)
    n = bundle.count
    if isinstance(n, bool) or not isinstance(n, (int, np.integer)) or n < 1:
        raise must_be(f"{path}.count", "an integer >= 1", n, GeometryError)
    if n > 1:
        if bundle.spacing_m is None:
            raise must_be(f"{path}.spacing_m", "given (> 0 m) when count > 1", None, GeometryError)
        s = check_finite(f"{path}.spacing_m", bundle.spacing_m, "> 0 m", GeometryError)
        if s <= d:
            raise must_be(f"{path}.spacing_m",
                          f"> subconductor_diameter_m = {d!r} m (subconductors must not overlap)",
                          bundle.spacing_m, GeometryError)


def _check_screen(path: str, circuit: Circuit) -> float:
    """Check an underground circuit's ``screen``; return the screen's mean radius [m] (0 when not given)."""
    screen: CableScreen = circuit.screen
    if circuit.kind != "underground":
        raise must_be(path, "absent for an overhead circuit (screens belong to underground cables)", "a screen",
                      GeometryError)
    if screen.bonding not in BONDINGS:
        raise must_be(f"{path}.bonding", f"one of {', '.join(BONDINGS)}", screen.bonding, GeometryError)
    if circuit.bundle.count != 1:
        raise must_be(f"{circuit_path(path)}.bundle.count",
                      "1 for a circuit with a screen (one single-core cable per phase position)",
                      circuit.bundle.count, GeometryError)
    both = screen.bonding == "both_ends"
    for name, unit in (("resistance_ohm_per_km", "ohm/km"), ("mean_diameter_m", "m")):
        value = getattr(screen, name)
        if value is None:
            if both:
                raise must_be(f"{path}.{name}", f"given (> 0 {unit}) for screens bonded at both ends", None,
                              LoadingError if name.startswith("resistance") else GeometryError)
            continue
        cls = LoadingError if name.startswith("resistance") else GeometryError
        if check_finite(f"{path}.{name}", value, f"> 0 {unit}", cls) <= 0:
            raise must_be(f"{path}.{name}", f"> 0 {unit}", value, cls)
    if screen.mean_diameter_m is None:
        return 0.0
    d = circuit.bundle.subconductor_diameter_m
    if screen.mean_diameter_m <= d:
        raise must_be(f"{path}.mean_diameter_m",
                      f"> the conductor diameter (bundle.subconductor_diameter_m = {d!r} m): the screen lies "
                      "outside the conductor", screen.mean_diameter_m, GeometryError)
    return screen.mean_diameter_m / 2.0


def circuit_path(screen_path: str) -> str:
    """``"...circuits[0]"`` from ``"...circuits[0].screen"``."""
    return screen_path.rsplit(".", 1)[0]


def validate_circuit(circuit: Circuit, field: str = "circuit") -> float:
    """Check a circuit's kind, loading, bundle and phase labels (not its positions).

    Shared by the cross-section and the route engines; conductor positions are
    checked by the caller, which knows where the ground is.

    Parameters
    ----------
    circuit : Circuit
    field : str
        Path of the circuit in the input, e.g. ``"cross_section.circuits[0]"``.

    Returns
    -------
    float
        Outer radius of one phase position (bundle radius + subconductor radius, or
        the screen's mean radius when a cable screen with a diameter is given) [m].

    Raises
    ------
    GeometryError, LoadingError
        As listed in :func:`validate_cross_section`.

    Examples
    --------
    >>> from models.geometry import Circuit, Conductor
    >>> c = Circuit("c", "overhead", 132.0, 500.0, (Conductor("L1", 0, 10),), Bundle(0.03, 2, 0.4))
    >>> round(validate_circuit(c), 6)
    0.215
    """
    if circuit.kind not in ("overhead", "underground"):
        raise must_be(f"{field}.kind", "'overhead' or 'underground'", circuit.kind, GeometryError)
    for name in ("voltage_kv", "current_a"):
        value = check_finite(f"{field}.{name}", getattr(circuit, name), ">= 0", LoadingError)
        if value < 0:
            raise must_be(f"{field}.{name}", ">= 0", getattr(circuit, name), LoadingError)
    check_finite(f"{field}.angle_offset_deg", circuit.angle_offset_deg, "in degrees", LoadingError)
    if not circuit.conductors:
        raise must_be(f"{field}.conductors", "a non-empty list of conductors", [], GeometryError)
    _check_bundle(f"{field}.bundle", circuit.bundle)
    circuit_phase_angles_deg(circuit, field)
    outer = bundle_radius_m(circuit.bundle) + circuit.bundle.subconductor_diameter_m / 2.0
    if getattr(circuit, "screen", None) is not None:
        outer = max(outer, _check_screen(f"{field}.screen", circuit))
    return outer


def validate_cross_section(section: CrossSection, frequency_hz: float, *, field: str = "cross_section") -> None:
    """Check that a cross-section is physically possible and fully specified.

    Parameters
    ----------
    section : CrossSection
    frequency_hz : float
        Must lie in :data:`FREQUENCY_RANGE_HZ` (1 Hz .. 3 kHz) [Hz].
    field : str
        Path prefix used in error fields.

    Raises
    ------
    GeometryError
        Non-finite or impossible geometry: zero/negative diameter, bundle spacing
        missing or subconductors overlapping, overhead conductor at or below ground
        (``height - outer radius <= 0``), underground conductor reaching above ground,
        coincident or overlapping conductors/bundles, no circuit.
    LoadingError
        Unknown or ambiguous phase label, negative or non-finite voltage/current,
        frequency outside 1 Hz..3 kHz.

    Examples
    --------
    >>> from models.geometry import Bundle, Circuit, Conductor, CrossSection
    >>> c = Circuit("c1", "overhead", 132.0, 500.0,
    ...             (Conductor("L1", -4, 12), Conductor("L2", 0, 12), Conductor("L3", 4, 0.01)),
    ...             Bundle(0.03))
    >>> validate_cross_section(CrossSection((c,)), 50.0)
    Traceback (most recent call last):
    ...
    models.errors.GeometryError: Input cross_section.circuits[0].conductors[2].height_m must be > 0.015 m (conductor radius plus bundle radius, clear of the ground) for an overhead conductor; instead received 0.01.
    """
    validate_frequency(frequency_hz)
    if not isinstance(section, CrossSection):
        raise must_be(field, "a CrossSection", type(section).__name__, GeometryError)
    if not section.circuits:
        raise must_be(f"{field}.circuits", "a non-empty list of circuits", [], GeometryError)
    envelopes: list[tuple[float, float, float, str]] = []  # x, y, outer radius, path
    for i, circuit in enumerate(section.circuits):
        cpath = f"{field}.circuits[{i}]"
        outer = validate_circuit(circuit, cpath)
        for k, conductor in enumerate(circuit.conductors):
            kpath = f"{cpath}.conductors[{k}]"
            x = check_finite(f"{kpath}.offset_m", conductor.offset_m, "in metres", GeometryError)
            y = check_finite(f"{kpath}.height_m", conductor.height_m, "in metres", GeometryError)
            if circuit.kind == "overhead" and y - outer <= 0:
                raise must_be(f"{kpath}.height_m",
                              f"> {outer!r} m (conductor radius plus bundle radius, clear of the ground) "
                              "for an overhead conductor", conductor.height_m, GeometryError)
            if circuit.kind == "underground" and y + outer >= 0:
                raise must_be(f"{kpath}.height_m",
                              f"< {-outer!r} m (negative depth, conductor fully below ground) "
                              "for an underground conductor", conductor.height_m, GeometryError)
            check_phasor(f"{kpath}.current", conductor.current, "magnitude_a")
            check_phasor(f"{kpath}.voltage_to_ground", conductor.voltage_to_ground, "magnitude_kv")
            envelopes.append((x, y, outer, kpath))
    for j, wire in enumerate(section.earth_wires):
        wpath = f"{field}.earth_wires[{j}]"
        x = check_finite(f"{wpath}.offset_m", wire.offset_m, "in metres", GeometryError)
        y = check_finite(f"{wpath}.height_m", wire.height_m, "in metres", GeometryError)
        d = check_finite(f"{wpath}.diameter_m", wire.diameter_m, "> 0 m", GeometryError)
        if d <= 0:
            raise must_be(f"{wpath}.diameter_m", "> 0 m", wire.diameter_m, GeometryError)
        if y - d / 2.0 <= 0:
            raise must_be(f"{wpath}.height_m", f"> {d / 2.0!r} m (wire radius, clear of the ground)",
                          wire.height_m, GeometryError)
        check_phasor(f"{wpath}.current", wire.current, "magnitude_a")
        envelopes.append((x, y, d / 2.0, wpath))
    check_overlaps(envelopes)


_SMALL_PAIR_COUNT = 24
"""Up to this many conductors the overlap check runs as plain loops, above it in numpy."""


def check_overlaps(envelopes: list[tuple[float, float, float, str]]) -> None:
    """Raise GeometryError for the first pair of conductors whose outer circles touch or overlap."""
    if len(envelopes) < 2:
        return
    m = len(envelopes)
    if m <= _SMALL_PAIR_COUNT:
        # a typical section has a handful of conductors: plain loops beat numpy's call overhead
        pair = next(((a, b) for a in range(m) for b in range(a + 1, m)
                     if math.hypot(envelopes[a][0] - envelopes[b][0], envelopes[a][1] - envelopes[b][1])
                     <= envelopes[a][2] + envelopes[b][2]), None)
        if pair is None:
            return
        a, b = pair
    else:
        x, y, rr = (np.array([e[c] for e in envelopes]) for c in range(3))
        ia, ib = np.triu_indices(m, k=1)                    # every pair once, row-major order
        clash = np.flatnonzero(np.hypot(x[ia] - x[ib], y[ia] - y[ib]) <= rr[ia] + rr[ib])
        if clash.size == 0:
            return
        a, b = int(ia[clash[0]]), int(ib[clash[0]])
    d = math.hypot(envelopes[a][0] - envelopes[b][0], envelopes[a][1] - envelopes[b][1])
    r = [e[2] for e in envelopes]
    what = "coincident with" if d == 0.0 else "overlapping"
    raise GeometryError(
        envelopes[b][3],
        f"Input {envelopes[b][3]} must be clear of {envelopes[a][3]} (centre distance > "
        f"{r[a] + r[b]!r} m); instead received a conductor {what} it (centre distance {d!r} m).",
    )
