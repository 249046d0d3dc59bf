"""The study section of the HTML report: one table row per case (the base case and each load case)."""

from __future__ import annotations

from collections.abc import Callable, Mapping
from typing import Any

Format = Callable[[Any], str]


def _value(case: Mapping[str, Any], stem: str, format_number: Format) -> str:
    """``<stem>_kv_m`` or ``<stem>_ut`` of a case, with its unit."""
    for suffix, unit in (("kv_m", "kV/m"), ("ut", "µT")):
        value = case.get(f"{stem}_{suffix}")
        if isinstance(value, (int, float)):
            return f"{format_number(value)} {unit}"
    return "–"


def study_section(report: Mapping[str, Any], format_number: Format) -> dict[str, Any] | None:
    """Title, method, column headers, rows and summary of the report's ``study``; None without one.

    ``format_number`` writes one number for the page (:func:`service.reports.format_number`).
    """

    def _m(value: Any) -> str:
        return "–" if value is None else f"{format_number(value)} m"

    study = report.get("study")
    if not isinstance(study, Mapping):
        return None
    cases = study.get("cases") or []
    if study.get("kind") == "clearance":
        threshold = study.get("threshold") or {}
        beyond = study.get("beyond_offset_m")
        where = "everywhere" if beyond is None else f"beyond {format_number(beyond)} m from the centre line"
        rows = [[c.get("label", c.get("id", "")), "yes" if c.get("achieved") else "no",
                 _m(c.get("clearance_m")), _m(c.get("raise_m")), _m(c.get("given_clearance_m")),
                 _value(c, "given_max", format_number), _value(c, "value", format_number), _m(c.get("binding_offset_m")), c.get("note") or ""]
                for c in cases]
        return {"title": "Clearance needed", "method": study.get("method", ""),
                "summary": (f"Lowest conductor clearance at which the field at {format_number(study.get('height_m'))} m "
                            f"stays below {threshold.get('title') or threshold.get('id', 'the threshold')} {where}: "
                            f"{_m(study.get('clearance_m'))} (governing case {study.get('governing_case')}; "
                            f"tolerance {_m(study.get('tolerance_m'))}; "
                            f"{'achieved' if study.get('achieved') else 'NOT achieved within the range'})."),
                "headers": ["Case", "Achieved", "Clearance needed", "Raise", "Given clearance", "Given maximum",
                            "At the clearance found", "Binding offset", "Note"],
                "rows": rows}
    if study.get("kind") == "phase_arrangement":
        rows = [[c.get("label", c.get("id", "")), str(c.get("arrangements_evaluated", "")),
                 " / ".join(map(str, (c.get("given") or {}).get("arrangement", []))), _value(c.get("given") or {}, "value", format_number),
                 " / ".join(map(str, (c.get("best") or {}).get("arrangement", []))), _value(c.get("best") or {}, "value", format_number),
                 f"{float(c.get('reduction_percent', 0.0)):.1f} %"] for c in cases]
        return {"title": "Phase arrangement", "method": study.get("method", ""),
                "summary": f"Ranked by {study.get('rank_by')}; governing case {study.get('governing_case')}.",
                "headers": ["Case", "Arrangements", "Given arrangement", "Given value", "Best arrangement",
                            "Best value", "Reduction"],
                "rows": rows}
    return None
