"""The ``harmonics`` member of a report: the multiple-frequency sum rule for the base case and every load case.

Present only when some circuit gives ``harmonics``, so reports of sinusoidal requests
are unchanged.  The engine part is :mod:`models.harmonics` (each order evaluated once on
the request's own sets, at ``order * frequency_hz``); values here are in presentation
units (kV/m, µT, :mod:`service.tables`).
"""

from __future__ import annotations

import dataclasses
from collections.abc import Callable, Mapping
from typing import Any

from models import catalogue
from models.evaluation import Evaluation
from models.harmonics import PHASE_RULE, HarmonicCompliance, evaluate_harmonics, harmonic_compliance
from models.harmonics import harmonic_orders
from models.load_cases import evaluate_load_cases

from .tables import presentation

METHOD = ("Each harmonic order given on any circuit is evaluated once, on the same points, at order x frequency_hz, "
          "with every circuit's phase currents and phase-to-ground voltages scaled by its fractions for that order "
          "(a circuit without the order contributes nothing there; earth-wire currents are not carried over). Per "
          "threshold and point the summed exposure index is sum over frequencies of field / reference level at "
          "that frequency (resultant rms); the largest over the points the threshold is judged on is reported "
          "with its components.")


def harmonic_rows(view: Any, ev: Evaluation, judged: list[HarmonicCompliance]) -> list[dict[str, Any]]:
    """One entry per threshold: rule, summed and fundamental-only index, verdict, worst point and its components."""
    rows = []
    for h in judged:
        _, conv, suffix = presentation(h.threshold.quantity)
        row = {"level_id": h.threshold.level_id, "quantity": h.threshold.quantity, "rule": h.rule,
               "rule_note": h.rule_note, "basis": h.basis, "fundamental_index": h.fundamental_index,
               "summed_index": h.summed_index, "passes": h.passes}
        if h.row is not None:
            row["location"] = view.location(ev, h.row)
            row["components"] = [{"order": c.order, "frequency_hz": c.frequency_hz, f"value_{suffix}": float(conv(
                c.value_si)), f"limit_{suffix}": float(conv(c.limit_si)), "ratio": float(c.ratio)}
                for c in h.components]
        if h.note:
            row["note"] = h.note
        rows.append(row)
    return rows


def _outcome(judged: list[HarmonicCompliance]) -> str:
    verdicts = [h.passes for h in judged if h.passes is not None]
    if not verdicts:
        return "not_assessed"
    return "pass" if all(verdicts) else "fail"


def harmonics_block(view: Any, request: Any, limits: list[catalogue.Threshold], ev: Evaluation,
                    bounds: Mapping[str, int] | None) -> dict[str, Any] | None:
    """The ``harmonics`` member, or None when no circuit gives harmonics.

    :raise models.errors.EngineInputError: a harmonic frequency out of the engine's range (field named).
    """
    line = request.line
    orders = harmonic_orders(line)
    if not orders:
        return None

    def evaluate(loaded: Any, frequency_hz: float) -> Evaluation:
        at = dataclasses.replace(request, frequency_hz=frequency_hz)
        return view.evaluate(at, loaded, bounds=bounds, zones=False)

    def judge_line(loaded: Any, fundamental: Evaluation) -> list[HarmonicCompliance]:
        return harmonic_compliance(fundamental, evaluate_harmonics(loaded, request.frequency_hz, evaluate,
                                                                   field=view.geometry), limits)

    base = judge_line(line, ev)
    cases: list[tuple[str, Evaluation, list[HarmonicCompliance]]] = [("base", ev, base)]
    fundamental_of: Callable[[Any], Evaluation] = lambda loaded: view.evaluate(request, loaded, bounds=bounds,
                                                                                zones=False)
    for case, loaded, case_ev in evaluate_load_cases(line, request.load_cases or (), fundamental_of):
        cases.append((case.id, case_ev, judge_line(loaded, case_ev)))
    block: dict[str, Any] = {
        "orders": list(orders),
        "frequencies_hz": [request.frequency_hz * n for n in orders],
        "outcome": _outcome(base),
        "phase_rule": PHASE_RULE,
        "method": METHOD,
        "compliance": harmonic_rows(view, ev, base),
    }
    if request.load_cases:
        block["load_cases"] = [{"id": case_id, "outcome": _outcome(judged),
                                "compliance": [{"level_id": h.threshold.level_id, "quantity": h.threshold.quantity,
                                                "summed_index": h.summed_index, "passes": h.passes}
                                               for h in judged]} for case_id, _, judged in cases]
        governing = []
        for k, h in enumerate(base):
            if h.summed_index is None:
                continue
            case_id, judged = max(((c, j) for c, _, j in cases), key=lambda c: c[1][k].summed_index)
            governing.append({"level_id": h.threshold.level_id, "quantity": h.threshold.quantity, "case_id": case_id,
                              "summed_index": judged[k].summed_index, "passes": judged[k].passes})
        block["governing"] = governing
        block["outcome"] = "fail" if any(c["outcome"] == "fail" for c in block["load_cases"]) else block["outcome"]
    return block
