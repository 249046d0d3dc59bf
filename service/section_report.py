"""How a cross-section's evaluation appears in a report (:class:`service.report.GeometryView`).

Points are located by offset across the line (+ right) and height above ground;
components are horizontal and vertical (:data:`service.tables.SECTION_AXES`).
"""

from __future__ import annotations

from collections.abc import Mapping
from typing import Any

import numpy as np

from models.cable_screens import screen_currents
from models.evaluation import Evaluation
from models.geometry import CrossSection
from models.judging import EdgeMaximum, Judgement
from models.section_sets import evaluate_section
from models.sources import build_sources, circuit_phase_angles_deg, validate_cross_section
from models.units import t_to_ut, v_per_m_to_kv_per_m

from .schema_fields import to_plain
from .schemas import AssessmentRequest
from .tables import SECTION_AXES, point_rows, resultant_rows


SCREEN_NOTE = (
    "Screens bonded at both ends carry circulating currents induced by the conductor currents; they are "
    "included in the magnetic field. The screens of a circuit are joined at both ends and share one voltage "
    "drop; their currents sum to zero (none returns through the earth). Single-point and cross-bonded screens "
    "carry no circulating current. Currents are rms phasors, positive in the conductors' direction; angles "
    "on the same reference as the conductor currents. Shown for the loading as requested; load cases scale "
    "them with their currents.")


def screen_block(line: CrossSection, frequency_hz: float) -> dict[str, Any] | None:
    """The ``cable_screens`` member: per underground circuit with a screen, each cable's screen current (None without screens)."""
    screened = [i for i, c in enumerate(line.circuits) if c.kind == "underground" and c.screen is not None]
    if not screened:
        return None
    sources = build_sources(line)
    solved = screen_currents(line, sources, frequency_hz)
    induced = {} if solved is None else {
        (int(i), int(k)): complex(v) for i, k, v in zip(solved.circuit_index, solved.conductor_index,
                                                        solved.screen_current_a)}
    circuits = []
    for i in screened:
        circuit = line.circuits[i]
        phases = circuit_phase_angles_deg(circuit)
        cables = []
        for k, conductor in enumerate(circuit.conductors):
            wire = int(np.flatnonzero((sources.circuit_index == i) & (sources.conductor_index == k))[0])
            i_c, i_s = complex(sources.current_a[wire]), induced.get((i, k), 0j)
            cables.append({"conductor_index": k, "phase": conductor.phase, "offset_m": conductor.offset_m,
                           "height_m": conductor.height_m, "conductor_current_a": abs(i_c),
                           "conductor_angle_deg": _angle_deg(i_c, phases[k]), "screen_current_a": abs(i_s),
                           "screen_angle_deg": _angle_deg(i_s, None),
                           "screen_to_conductor_ratio": abs(i_s) / abs(i_c) if abs(i_c) > 0.0 else None})
        circuits.append({"circuit_id": circuit.id, "bonding": circuit.screen.bonding,
                         "resistance_ohm_per_km": circuit.screen.resistance_ohm_per_km,
                         "mean_diameter_m": circuit.screen.mean_diameter_m,
                         "net_screen_current_a": abs(sum(induced.get((i, k), 0j)
                                                         for k in range(len(circuit.conductors)))),
                         "cables": cables})
    return {"note": SCREEN_NOTE, "circuits": circuits}


def _angle_deg(phasor: complex, fallback: float | None) -> float:
    """Angle of a phasor in (-180, 180] deg; a zero phasor gets ``fallback`` (its nominal angle) or 0."""
    if phasor == 0:
        return 0.0 if fallback is None else float(fallback)
    return float(np.degrees(np.angle(phasor)))


def _lead(evaluation: Evaluation) -> dict[str, Any]:
    points = evaluation.sets["points"].field.points_m
    return {"offset_m": points[:, 0], "height_m": points[:, 1]}


class SectionView:
    """The cross-section geometry: evaluator :func:`models.section_sets.evaluate_section`."""

    geometry = "cross_section"

    def check(self, request: AssessmentRequest) -> None:
        validate_cross_section(request.cross_section, request.frequency_hz)  # geometry and frequency first

    def evaluate(self, request: AssessmentRequest, line: Any, *, bounds: Mapping[str, int] | None = None,
                 zones: bool = True) -> Evaluation:
        return evaluate_section(line, request.frequency_hz, request.sets,
                                soil_resistivity_ohm_m=request.soil_resistivity_ohm_m)

    def plain(self, request: AssessmentRequest) -> dict[str, Any]:
        return to_plain(request)

    def members(self, request: AssessmentRequest, evaluation: Evaluation) -> dict[str, Any]:
        out = {"points": point_rows(_lead(evaluation), evaluation.sets["points"].field, SECTION_AXES)}
        screens = screen_block(request.cross_section, request.frequency_hz)
        if screens is not None:
            out["cable_screens"] = screens
        return out

    def location(self, evaluation: Evaluation, row: int) -> dict[str, Any]:
        _, i = evaluation.locate(row)
        offset_m, height_m = evaluation.combined.points_m[row]
        return {"offset_m": float(offset_m), "height_m": float(height_m), "point_index": i}

    def max_location(self, evaluation: Evaluation, row: int) -> tuple[dict[str, Any], dict[str, Any]]:
        offset_m, height_m = evaluation.combined.points_m[row]
        return {"max_offset_m": float(offset_m), "max_height_m": float(height_m)}, {}

    def distance_note(self, judgement: Judgement) -> str:
        return judgement.distances.distance_note if judgement.distances is not None else ""

    def edge_block(self, request: AssessmentRequest, evaluation: Evaluation, edges: list[EdgeMaximum],
                   exposure: list[list[dict[str, Any]]]) -> dict[str, Any]:
        s = evaluation.sets["right_of_way"]
        height_m = s.details["height_m"]
        row = request.right_of_way
        return {"left_m": row.left_m, "right_m": row.right_m, "height_m": height_m,
                "height_basis": s.details["height_basis"], "note": s.note,
                "edges": [{"edge": e.edge, "offset_m": float(getattr(row, f"{e.edge}_m")), "height_m": height_m,
                           "e_kv_m": float(v_per_m_to_kv_per_m(e.e_v_per_m)), "b_ut": float(t_to_ut(e.b_t)),
                           "exposure": x} for e, x in zip(edges, exposure)]}

    def case_members(self, evaluation: Evaluation) -> dict[str, Any]:
        return {"points": resultant_rows(_lead(evaluation), evaluation.sets["points"].field)}


SECTION = SectionView()
