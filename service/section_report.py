"""How a cross-section's evaluation appears in a report (:class:`service.report.GeometryView`).

Points are located by offset across the line (+ right) and height above ground;
components are horizontal and vertical (:data:`service.tables.SECTION_AXES`).
"""

from __future__ import annotations

from collections.abc import Mapping
from typing import Any

from models.evaluation import Evaluation
from models.judging import EdgeMaximum, Judgement
from models.section_sets import evaluate_section
from models.sources import validate_cross_section
from models.units import t_to_ut, v_per_m_to_kv_per_m

from .schema_fields import to_plain
from .schemas import AssessmentRequest
from .tables import SECTION_AXES, point_rows, resultant_rows


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
        return {"points": point_rows(_lead(evaluation), evaluation.sets["points"].field, SECTION_AXES)}

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
