"""Harmonics: fields at each harmonic frequency and the multiple-frequency sum rule.

A circuit may carry harmonics (:class:`models.geometry.Harmonic`): per order ``n`` the
rms current and line-to-line voltage as fractions of the fundamental.  Works on a
cross-section and on a route alike (both hold circuits with ``current_a``,
``voltage_kv``, conductors with optional phasors, and earth wires).

Model
-----
* **Frequencies**: ``f_n = n * f`` (the system frequency ``f``); each order present on
  any circuit is evaluated once, with every circuit's loading at that order (fields are
  linear in currents and voltages, so the order's field is the superposition of the
  circuits' contributions).  A circuit without that order contributes nothing there.
* **Magnitudes**: phase current ``current_fraction * I`` and phase-to-ground voltage
  ``voltage_fraction * V / sqrt(3)``; a conductor with its own current or voltage phasor
  gets that phasor's magnitude times the fraction.
* **Phase sequence**: the *n*-th harmonic of a conductor whose fundamental is at angle
  ``phi`` is at ``n * phi`` (the waveforms of the phases are one waveform shifted in time
  by ``phi / omega``, so the n-th harmonic shifts by ``n * phi``; common practice, the
  textbook behaviour of balanced harmonics).  Hence orders 3, 6, 9, ... (triplen) are
  zero sequence (all phases in phase), orders 3k + 1 positive and 3k + 2 negative
  sequence.  Angles include ``reverse_sequence`` and ``angle_offset_deg``; per-conductor
  phasor angles are multiplied by ``n`` too.
* Neutrals carry nothing at harmonics (unless they have their own current phasor, which
  is scaled like any other), and **earth-wire currents are not carried over**: an
  earth-wire current is given at the fundamental only.
* Cable screens: the screen currents are recomputed at each harmonic frequency by the
  engine (their reactance grows with frequency).

Compliance (:func:`harmonic_compliance`): per threshold and point the summed exposure
index ``sum_i X_i / X_R,i`` over the fundamental and the harmonics, with the level's
value at each frequency (:func:`models.compliance.multi_frequency_exposure_index`, the
ICNIRP 2010 rule), judged on the same points as the fundamental
(:func:`models.judging.basis_for`).  Which rule applies to each catalogue entry:
:func:`sum_rule`.
"""

from __future__ import annotations

import dataclasses
import math
from collections.abc import Callable, Sequence
from dataclasses import dataclass
from typing import Any, TypeVar

import numpy as np

from .catalogue import Threshold, get_level, thresholds_for
from .errors import CatalogueError, EngineInputError, LoadingError
from .evaluation import Evaluation
from .geometry import CurrentPhasor, VoltagePhasor
from .judging import basis_for
from .sources import FREQUENCY_RANGE_HZ, circuit_phase_angles_deg
from .units import SQRT3

__all__ = ["HarmonicCompliance", "HarmonicComponent", "MAX_ORDER", "PHASE_RULE", "evaluate_harmonics",
           "harmonic_compliance", "harmonic_line", "harmonic_orders", "sum_rule"]

Line = TypeVar("Line")

MAX_ORDER = 50
"""Highest harmonic order accepted (the usual range of harmonic assessment, common practice: up to the 50th)."""

PHASE_RULE = ("The n-th harmonic of a conductor whose fundamental phasor is at angle phi is at n * phi "
              "(balanced harmonics: the phases carry one waveform shifted in time), so triplen orders (3, 6, 9, ...) "
              "are zero sequence, orders 3k+1 positive and 3k+2 negative sequence (common practice).")

SUM_RULE_NOTES = {
    "icnirp-2010": "ICNIRP 2010 rule for simultaneous exposure to several frequencies (1 Hz to 10 MHz): "
                   "sum_j E_j / E_R,j <= 1 and sum_j B_j / B_R,j <= 1 (from memory, ICNIRP 2010, Health Phys. "
                   "99(6):818-836, section on multiple frequency fields). Linear sum of amplitudes: the worst "
                   "case of all components in phase; the guidelines' weighted-peak alternative is not applied.",
    "icnirp-1998": "ICNIRP 1998 summation for reference levels: sum_j E_j / E_L,j (1 Hz to 1 MHz) <= 1 and "
                   "sum_j H_j / H_L,j (1 Hz to 150 kHz) <= 1 (from memory, ICNIRP 1998, Health Phys. 74(4), "
                   "section on simultaneous exposure to multiple frequency fields); the terms above 1 MHz and "
                   "150 kHz do not arise below 3 kHz.",
    "eu-1999-519": "Council Recommendation 1999/519/EC, Annex IV: the ICNIRP 1998 summation for reference "
                   "levels, sum_j E_j / E_L,j <= 1 and sum_j B_j / B_L,j <= 1 below 1 MHz / 150 kHz "
                   "(from memory).",
    "eu-2013-35": "Directive 2013/35/EU assesses non-sinusoidal fields by the weighted peak method in the time "
                  "domain (from memory, Annex II), which is not implemented here: the ICNIRP 2010 sum of ratios "
                  "is applied as a conservative default (it adds the components as if all were in phase).",
}
"""The multiple-frequency rule of each document family (catalogue id prefix)."""

RULE_KEYS = {"icnirp-2010": "icnirp-2010-sum", "icnirp-1998": "icnirp-1998-sum", "eu-1999-519": "icnirp-1998-sum",
             "eu-2013-35": "default-sum"}

DEFAULT_NOTE = ("No multiple-frequency rule of this document is encoded here (not verified): the ICNIRP 2010 sum "
                "of ratios, with the document's own values at each frequency, is applied as a conservative default.")
SINGLE_FREQUENCY_NOTE = ("The document gives its value at {f} Hz only: there is no value at the harmonic "
                         "frequencies, so no sum of ratios can be formed; not assessed for harmonics (the "
                         "fundamental-only judgement stands).")
CUSTOM_NOTE = ("A custom limit is given at the system frequency only: there is no value at the harmonic "
               "frequencies, so no sum of ratios can be formed; not assessed for harmonics.")


def sum_rule(threshold: Threshold) -> tuple[str, str]:
    """Which multiple-frequency rule applies to a threshold: ``(key, note)``.

    Keys: ``"icnirp-2010-sum"``, ``"icnirp-1998-sum"`` (the same linear form),
    ``"default-sum"`` (no rule of the document encoded; ICNIRP 2010's applied),
    ``"not-assessed"`` (a value at one frequency only, or a custom limit).

    >>> from models.catalogue import thresholds_for
    >>> [sum_rule(t)[0] for t in thresholds_for(["icnirp-2010-public", "de-26-bimschv-2013"], 50.0)]
    ['icnirp-2010-sum', 'icnirp-2010-sum', 'not-assessed', 'not-assessed']
    """
    if threshold.status == "custom":
        return "not-assessed", CUSTOM_NOTE
    qd = get_level(threshold.level_id).quantity(threshold.quantity)
    if qd is None or qd.f_min_hz == qd.f_max_hz:
        return "not-assessed", SINGLE_FREQUENCY_NOTE.format(f=f"{threshold.frequency_hz:g}")
    for prefix, key in RULE_KEYS.items():
        if threshold.level_id.startswith(prefix):
            return key, SUM_RULE_NOTES[prefix]
    return "default-sum", DEFAULT_NOTE


def harmonic_orders(line: Any) -> tuple[int, ...]:
    """Every harmonic order given on any circuit, increasing (empty without harmonics)."""
    return tuple(sorted({h.order for c in line.circuits for h in (c.harmonics or ())}))


def _phasor_at(magnitude: float, angle_deg: float, fraction: float, order: int) -> tuple[float, float]:
    return magnitude * fraction, math.remainder(angle_deg * order, 360.0)


def harmonic_line(line: Line, order: int, *, field: str = "cross_section") -> Line:
    """The line loaded as at harmonic ``order`` (see the module notes): per-conductor phasors, no earth-wire currents.

    Parameters
    ----------
    line : CrossSection or Route
    order : int
        Harmonic order (>= 2).
    field : str
        Path prefix of error fields (``"cross_section"`` or ``"route"``).

    Returns
    -------
    CrossSection or Route
        Same geometry; every phase conductor carries an explicit current and voltage
        phasor at the harmonic, circuits without this order carry zero.

    Examples
    --------
    >>> from models.geometry import Bundle, Circuit, Conductor, CrossSection, Harmonic
    >>> c = Circuit("c1", "overhead", 132.0, 500.0, tuple(Conductor(p, x, 12.0) for p, x in
    ...             (("L1", -4.0), ("L2", 0.0), ("L3", 4.0))), Bundle(0.03), harmonics=(Harmonic(3, 0.1, 0.0),))
    >>> [(k.current.magnitude_a, k.current.angle_deg) for k in harmonic_line(CrossSection((c,)), 3).circuits[0].conductors]
    [(50.0, 0.0), (50.0, -0.0), (50.0, 0.0)]
    """
    circuits = []
    for i, c in enumerate(line.circuits):
        h = next((h for h in (c.harmonics or ()) if h.order == order), None)
        fi, fv = (h.current_fraction, h.voltage_fraction) if h is not None else (0.0, 0.0)
        angles = circuit_phase_angles_deg(c, f"{field}.circuits[{i}]")
        v_phase_kv = c.voltage_kv / SQRT3
        conductors = []
        for k, angle in zip(c.conductors, angles):
            if k.current is not None:
                current = CurrentPhasor(*_phasor_at(k.current.magnitude_a, k.current.angle_deg, fi, order))
            else:
                current = None if angle is None else CurrentPhasor(*_phasor_at(c.current_a, angle, fi, order))
            if k.voltage_to_ground is not None:
                g = k.voltage_to_ground
                voltage = VoltagePhasor(*_phasor_at(g.magnitude_kv, g.angle_deg, fv, order))
            else:
                voltage = None if angle is None else VoltagePhasor(*_phasor_at(v_phase_kv, angle, fv, order))
            conductors.append(dataclasses.replace(k, current=current, voltage_to_ground=voltage))
        circuits.append(dataclasses.replace(c, current_a=c.current_a * fi, voltage_kv=c.voltage_kv * fv,
                                            conductors=tuple(conductors), harmonics=None))
    earth_wires = tuple(dataclasses.replace(w, current=None) for w in line.earth_wires)
    return dataclasses.replace(line, circuits=tuple(circuits), earth_wires=earth_wires)


def evaluate_harmonics(line: Line, frequency_hz: float, evaluate: Callable[[Line, float], Evaluation], *,
                       field: str = "cross_section") -> list[tuple[int, Evaluation]]:
    """Every harmonic order of ``line`` evaluated once: ``[(order, evaluation at order * frequency_hz), ...]``.

    ``evaluate(loaded_line, frequency_hz)`` returns the evaluation of the same sets (for
    example ``lambda s, f: evaluate_section(s, f, sets)``).

    Raises
    ------
    LoadingError
        A harmonic frequency above the engine's range (field
        ``f"{field}.circuits[i].harmonics[k].order"``, the first circuit giving it).
    """
    hi = FREQUENCY_RANGE_HZ[1]
    for i, c in enumerate(line.circuits):
        for k, h in enumerate(c.harmonics or ()):
            if h.order * frequency_hz > hi * (1 + 1e-12):
                raise LoadingError(f"{field}.circuits[{i}].harmonics[{k}].order",
                                   f"Harmonic order {h.order} is at {h.order * frequency_hz:g} Hz; the engine "
                                   f"computes fields up to {hi:g} Hz (order at most {int(hi // frequency_hz)} at "
                                   f"{frequency_hz:g} Hz).")
    return [(n, evaluate(harmonic_line(line, n, field=field), n * frequency_hz)) for n in harmonic_orders(line)]


@dataclass(frozen=True)
class HarmonicComponent:
    """One frequency's share of a summed index at one point: field, limit and their ratio (SI)."""

    order: int
    frequency_hz: float
    value_si: float
    limit_si: float

    @property
    def ratio(self) -> float:
        return self.value_si / self.limit_si


@dataclass(frozen=True)
class HarmonicCompliance:
    """One threshold judged by the multiple-frequency sum rule.

    Attributes
    ----------
    threshold : Threshold
        At the fundamental.
    rule, rule_note : str
        :func:`sum_rule`.
    basis : str
        Key of :data:`models.judging.BASIS_NOTES` (the points judged).
    fundamental_index : float
        Largest fundamental-only exposure index over those points.
    summed_index : float or None
        Largest ``sum_i X_i / X_R,i`` over those points; None when not assessed.
    row : int or None
        Row of :attr:`Evaluation.combined` where ``summed_index`` is (first if tied).
    components : tuple of HarmonicComponent
        The fundamental and every harmonic at that row (their ratios add up to ``summed_index``).
    passes : bool or None
        ``summed_index <= 1``; None when not assessed.
    note : str
    """

    threshold: Threshold
    rule: str
    rule_note: str
    basis: str
    fundamental_index: float
    summed_index: float | None
    row: int | None
    components: tuple[HarmonicComponent, ...]
    passes: bool | None
    note: str = ""


def _values(ev: Evaluation, quantity: str, rows: np.ndarray) -> np.ndarray:
    f = ev.combined
    return (f.e_rms_v_per_m if quantity == "E" else f.b_rms_t)[rows]


def harmonic_compliance(fundamental: Evaluation, harmonics: Sequence[tuple[int, Evaluation]],
                        thresholds: Sequence[Threshold]) -> list[HarmonicCompliance]:
    """Judge every threshold by the sum rule over the fundamental and the harmonics.

    Parameters
    ----------
    fundamental : Evaluation
        At the system frequency.
    harmonics : sequence of (order, Evaluation)
        Same sets, at ``order * fundamental.frequency_hz`` (:func:`evaluate_harmonics`).
    thresholds : sequence of Threshold
        At the fundamental; catalogue ones are looked up again at each harmonic frequency.

    Returns
    -------
    list of HarmonicCompliance
        One per threshold, in order.  Quantity: the resultant rms (:data:`models.judging.COMPLIANCE_QUANTITY`).
    """
    edges = fundamental.by_role("right_of_way")
    every_rows = fundamental.everywhere_rows()
    out = []
    for t in thresholds:
        basis = basis_for(t, edges is not None)
        rows = np.arange(edges.rows.start, edges.rows.stop) if basis == "right_of_way_edges" else every_rows
        base = _values(fundamental, t.quantity, rows)
        fundamental_index = float(np.max(base) / t.limit_si)
        rule, rule_note = sum_rule(t)
        limits = [t]
        note = ""
        if rule != "not-assessed":
            for n, ev in harmonics:
                try:
                    at = [x for x in thresholds_for([t.level_id], ev.frequency_hz) if x.quantity == t.quantity]
                except CatalogueError:
                    at = []
                if not at:
                    rule, note = "not-assessed", (f"{t.level_id!r} defines no {t.quantity} value at "
                                                  f"{ev.frequency_hz:g} Hz (harmonic {n}): not assessed.")
                    break
                limits.append(at[0])
        if rule == "not-assessed":
            out.append(HarmonicCompliance(t, rule, rule_note, basis, fundamental_index, None, None, (), None, note))
            continue
        evs = [(1, fundamental)] + list(harmonics)
        values = np.stack([_values(ev, t.quantity, rows) for _, ev in evs])  # (frequencies, points)
        limit_si = np.array([x.limit_si for x in limits])
        summed = (values / limit_si[:, None]).sum(axis=0)
        k = int(np.argmax(summed))
        components = tuple(HarmonicComponent(n, float(ev.frequency_hz), float(values[j, k]), float(limit_si[j]))
                           for j, (n, ev) in enumerate(evs))
        index = float(summed[k])
        out.append(HarmonicCompliance(t, rule, rule_note, basis, fundamental_index, index, int(rows[k]),
                                      components, bool(index <= 1.0), note))
    return out
