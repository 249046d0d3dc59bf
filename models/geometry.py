"""Input description of a line cross-section (the standard 2-D model).

Coordinates: ``offset_m`` is horizontal, across the line, positive to the right
looking along the route; ``height_m`` is vertical, above flat ground (ground at 0,
negative = buried).  Conductors run perpendicular to the section, infinitely long
and parallel.  All values are SI except the line-to-line voltage, which the trade
states in kV (``voltage_kv``), per-conductor voltage overrides (``magnitude_kv``) and
cable screen resistances, which data sheets state per km (``resistance_ohm_per_km``).

These are plain frozen dataclasses: the service builds them from JSON (after its
schema checks) and scripts build them directly.  Physical checks live in
:func:`models.sources.validate_cross_section` so they run with or without the service.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Literal


@dataclass(frozen=True)
class CurrentPhasor:
    """Per-conductor current override: rms magnitude [A] and angle [deg]."""

    magnitude_a: float
    angle_deg: float


@dataclass(frozen=True)
class VoltagePhasor:
    """Per-conductor voltage-to-ground override: rms magnitude [kV] and angle [deg]."""

    magnitude_kv: float
    angle_deg: float


@dataclass(frozen=True)
class Bundle:
    """Bundle of ``count`` identical subconductors on a circle.

    ``spacing_m`` is the distance between adjacent subconductors (required when
    ``count > 1``); the subconductors sit on a circle of radius
    ``A = spacing_m / (2 sin(pi / count))`` at angles ``pi/count - pi/2 + 2 pi k / count``
    (k = 0..count-1), i.e. with one flat side at the bottom: a 2-bundle side by side
    horizontally, a 3-bundle apex up, a 4-bundle square with horizontal sides.
    """

    subconductor_diameter_m: float
    count: int = 1
    spacing_m: float | None = None


@dataclass(frozen=True)
class Conductor:
    """One phase position (a single wire or a bundle centre).

    ``phase`` is a label: L1/L2/L3, A/B/C, R/S/T or R/Y/B (mapped to 0, -120, +120 deg),
    or N for a neutral (0 V, no current unless ``current`` is given).
    """

    phase: str
    offset_m: float
    height_m: float
    current: CurrentPhasor | None = None
    voltage_to_ground: VoltagePhasor | None = None


@dataclass(frozen=True)
class Harmonic:
    """One harmonic of a circuit's loading: order ``n`` (frequency ``n * f``) and rms magnitudes as fractions
    of the fundamental (current and line-to-line voltage), see :mod:`models.harmonics`."""

    order: int
    current_fraction: float = 0.0
    voltage_fraction: float = 0.0


BONDINGS = ("both_ends", "single_point", "cross_bonded")
"""How the metallic screens of a single-core cable circuit are bonded (see :mod:`models.cable_screens`)."""


@dataclass(frozen=True)
class CableScreen:
    """Metallic screen (or sheath) of every cable of an underground circuit.

    ``bonding``: one of :data:`BONDINGS`.  ``resistance_ohm_per_km`` is the screen's ac
    resistance per cable at operating temperature [ohm/km] (the unit of cable data
    sheets); ``mean_diameter_m`` its mean diameter [m] (IEC 60287-1-1's ``d``).  Both
    are required for ``"both_ends"`` (the only bonding whose screens carry a
    circulating current); for the others ``mean_diameter_m``, when given, only
    enlarges the cable's envelope for the geometry checks.
    """

    bonding: str
    resistance_ohm_per_km: float | None = None
    mean_diameter_m: float | None = None


@dataclass(frozen=True)
class Circuit:
    """A three-phase (or single-phase) circuit.

    ``voltage_kv`` is the line-to-line rms voltage; phase-to-ground is
    ``voltage_kv / sqrt(3)``.  ``current_a`` is the rms phase current.  With
    ``reverse_sequence`` the phase angles become 0, +120, -120 deg.
    ``kind == "underground"``: screened cables, no electric field outside;
    conductors have negative ``height_m`` (depth below ground).
    ``angle_offset_deg`` rotates every phase of the circuit (e.g. a circuit fed
    from another winding group).  ``screen`` (underground only, one single-core
    cable per phase position): the cables' screens and how they are bonded; None
    means screen currents are neglected.  ``harmonics``: see :class:`Harmonic`.
    """

    id: str
    kind: Literal["overhead", "underground"]
    voltage_kv: float
    current_a: float
    conductors: tuple[Conductor, ...]
    bundle: Bundle
    reverse_sequence: bool = False
    angle_offset_deg: float = 0.0
    screen: CableScreen | None = None
    harmonics: tuple[Harmonic, ...] | None = None
    """Harmonic orders of this circuit's currents and voltages (None: sinusoidal, the fundamental only)."""


@dataclass(frozen=True)
class EarthWire:
    """Grounded shield wire (V = 0).  Induced current ignored unless ``current`` is given."""

    offset_m: float
    height_m: float
    diameter_m: float
    current: CurrentPhasor | None = None


@dataclass(frozen=True)
class CrossSection:
    """Everything in one cross-section: circuits and earth wires."""

    circuits: tuple[Circuit, ...]
    earth_wires: tuple[EarthWire, ...] = field(default_factory=tuple)
