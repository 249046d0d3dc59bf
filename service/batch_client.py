"""``emf-batch``: submit a folder or JSON-lines file of scenarios to a service and gate on the verdicts.

Usage::

    emf-batch SCENARIOS --url http://127.0.0.1:8000 --out summary.csv

``SCENARIOS`` is a folder of ``*.json`` files (one assessment request each; the scenario
is named after the file) or a ``.jsonl`` file (one request per line, or
``{"name": ..., "request": {...}}``; unnamed lines are ``line-<n>``).  Each scenario is
posted to ``POST /v1/assessments`` with ``Authorization: Bearer $EMF_API_KEY`` (when set)
and an ``Idempotency-Key`` derived from the scenario's name and content, so a retry after
a transient failure (connection error, 429, 502, 503, 504) returns the same assessment
instead of storing a second one.  The summary CSV has one row per scenario: scenario, id,
verdict (``pass``, ``fail`` or ``error``), max E [kV/m], max B [µT], the worst exposure
index (over every threshold and load case) and, for errors, the problem's detail.

Exit status: 0 when every scenario was assessed and passes; 1 when any fails or could
not be assessed; 2 for a usage error (nothing submitted).  Standard library HTTP only;
the progress bar is tqdm's (on standard error).
"""

from __future__ import annotations

import argparse
import csv
import hashlib
import json
import os
import sys
import time
import urllib.error
import urllib.request
import uuid
from collections.abc import Sequence
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from tqdm import tqdm

TRANSIENT = {429, 502, 503, 504}
"""HTTP statuses retried (with the same Idempotency-Key)."""

KEY_VARIABLE = "EMF_API_KEY"
URL_VARIABLE = "EMF_URL"
SUMMARY_COLUMNS = ("scenario", "id", "verdict", "max_e_kv_m", "max_b_ut", "worst_exposure_index", "detail")
_NAMESPACE = uuid.UUID("6f1c3b52-2a1e-4c59-9d2b-7a0b5c3e9d10")  # this client's own UUID namespace


@dataclass(frozen=True)
class Scenario:
    name: str
    body: Any

    @property
    def idempotency_key(self) -> str:
        """Stable per scenario name and content: the same on every retry and rerun."""
        digest = hashlib.sha256(json.dumps(self.body, sort_keys=True).encode("utf-8")).hexdigest()
        return str(uuid.uuid5(_NAMESPACE, f"{self.name}\n{digest}"))


class UsageError(Exception):
    """Bad arguments or unreadable scenarios (exit status 2)."""


def read_scenarios(source: Path) -> list[Scenario]:
    """Scenarios of a folder of ``*.json`` files or of a ``.jsonl`` file, in name / line order."""
    if source.is_dir():
        files = sorted(source.glob("*.json"))
        if not files:
            raise UsageError(f"{source}: no *.json files")
        out = []
        for f in files:
            try:
                out.append(Scenario(f.stem, json.loads(f.read_text(encoding="utf-8"))))
            except (ValueError, UnicodeDecodeError) as exc:
                raise UsageError(f"{f}: not JSON ({exc})") from None
        return out
    if not source.is_file():
        raise UsageError(f"{source}: no such file or folder")
    out = []
    for n, line in enumerate(source.read_text(encoding="utf-8").splitlines(), start=1):
        if not line.strip():
            continue
        try:
            item = json.loads(line)
        except ValueError as exc:
            raise UsageError(f"{source}:{n}: not JSON ({exc})") from None
        if isinstance(item, dict) and set(item) == {"name", "request"}:
            out.append(Scenario(str(item["name"]), item["request"]))
        else:
            out.append(Scenario(f"line-{n}", item))
    names = [s.name for s in out]
    duplicates = sorted({x for x in names if names.count(x) > 1})
    if duplicates:
        raise UsageError(f"{source}: scenario names used twice: {', '.join(duplicates)}")
    if not out:
        raise UsageError(f"{source}: no scenarios")
    return out


def summary_row(scenario: Scenario, report: dict[str, Any]) -> dict[str, Any]:
    """The summary CSV row of an assessed scenario."""
    indices = [c["exposure_index"] for c in report.get("compliance", [])]
    indices += [g["exposure_index"] for g in (report.get("load_case_summary") or {}).get("governing", [])]
    outcome = (report.get("load_case_summary") or {}).get("outcome", report.get("outcome"))
    return {"scenario": scenario.name, "id": report.get("id", ""), "verdict": outcome,
            "max_e_kv_m": report["maxima"]["e"]["value_kv_m"], "max_b_ut": report["maxima"]["b"]["value_ut"],
            "worst_exposure_index": max(indices) if indices else "", "detail": ""}


def _error_row(scenario: Scenario, detail: str) -> dict[str, Any]:
    return {"scenario": scenario.name, "id": "", "verdict": "error", "max_e_kv_m": "", "max_b_ut": "",
            "worst_exposure_index": "", "detail": detail}


def _problem_detail(status: int, raw: bytes) -> str:
    try:
        problem = json.loads(raw)
    except ValueError:
        return f"HTTP {status}"
    parts = [f"HTTP {status}: {problem.get('detail') or problem.get('title', '')}".strip()]
    parts += [f"{e.get('pointer', e.get('parameter', ''))}: {e.get('detail', '')}" for e in problem.get("errors", [])]
    return "; ".join(parts)


def submit(scenario: Scenario, url: str, key: str | None, *, retries: int, timeout_s: float,
           backoff_s: float = 0.5) -> dict[str, Any]:
    """Post one scenario, retrying transient failures with the same Idempotency-Key; its summary row."""
    data = json.dumps(scenario.body).encode("utf-8")
    headers = {"Content-Type": "application/json", "Accept": "application/json",
               "Idempotency-Key": scenario.idempotency_key}
    if key:
        headers["Authorization"] = f"Bearer {key}"
    last = "no attempt made"
    for attempt in range(retries + 1):
        if attempt:
            time.sleep(backoff_s * 2 ** (attempt - 1))
        req = urllib.request.Request(url.rstrip("/") + "/v1/assessments", data=data, headers=headers, method="POST")
        try:
            with urllib.request.urlopen(req, timeout=timeout_s) as response:
                return summary_row(scenario, json.loads(response.read()))
        except urllib.error.HTTPError as exc:
            body = exc.read()
            last = _problem_detail(exc.code, body)
            if exc.code not in TRANSIENT:
                return _error_row(scenario, last)
        except (urllib.error.URLError, TimeoutError, ConnectionError) as exc:
            last = f"transport error: {getattr(exc, 'reason', exc)}"
    return _error_row(scenario, f"gave up after {retries + 1} attempts: {last}")


def run(scenarios: Sequence[Scenario], url: str, key: str | None, out: Path, *, workers: int = 4,
        retries: int = 4, timeout_s: float = 120.0, progress: bool = True) -> int:
    """Submit every scenario, write the summary CSV; the exit status (0 all pass, 1 otherwise)."""
    with ThreadPoolExecutor(max_workers=workers) as pool:
        jobs = pool.map(lambda s: submit(s, url, key, retries=retries, timeout_s=timeout_s), scenarios)
        rows = list(tqdm(jobs, total=len(scenarios), desc="assessments", unit="scenario", disable=not progress,
                         file=sys.stderr))
    with open(out, "w", newline="", encoding="utf-8") as fh:
        writer = csv.DictWriter(fh, fieldnames=SUMMARY_COLUMNS)
        writer.writeheader()
        writer.writerows(rows)
    verdicts = [r["verdict"] for r in rows]
    print(f"{len(rows)} scenarios: {verdicts.count('pass')} pass, {verdicts.count('fail')} fail, "
          f"{verdicts.count('error')} error; summary in {out}", file=sys.stderr)
    return 0 if all(v == "pass" for v in verdicts) else 1


def _parser() -> argparse.ArgumentParser:
    p = argparse.ArgumentParser(prog="emf-batch", description=__doc__.split("\n\n")[0])
    p.add_argument("scenarios", type=Path, help="folder of *.json requests or a .jsonl file")
    p.add_argument("--url", default=os.environ.get(URL_VARIABLE, "http://127.0.0.1:8000"),
                   help=f"service base URL (default ${URL_VARIABLE} or http://127.0.0.1:8000)")
    p.add_argument("--out", type=Path, default=Path("summary.csv"), help="summary CSV to write")
    p.add_argument("--workers", type=int, default=4, help="requests in flight (default 4)")
    p.add_argument("--retries", type=int, default=4, help="retries of a transient failure (default 4)")
    p.add_argument("--timeout", type=float, default=120.0, help="seconds per request (default 120)")
    p.add_argument("--quiet", action="store_true", help="no progress bar")
    return p


def main(argv: Sequence[str] | None = None) -> int:
    """Console entry point (``emf-batch``)."""
    args = _parser().parse_args(argv)
    try:
        if args.workers < 1 or args.retries < 0 or args.timeout <= 0:
            raise UsageError("--workers must be >= 1, --retries >= 0 and --timeout > 0")
        scenarios = read_scenarios(args.scenarios)
    except UsageError as exc:
        print(f"emf-batch: {exc}", file=sys.stderr)
        return 2
    return run(scenarios, args.url, os.environ.get(KEY_VARIABLE) or None, args.out, workers=args.workers,
               retries=args.retries, timeout_s=args.timeout, progress=not args.quiet)


if __name__ == "__main__":
    sys.exit(main())
