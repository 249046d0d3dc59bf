"""The documentation stays true: README short, every relative link resolves, the README's call gives what it shows."""

from __future__ import annotations

import json
import re
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parent.parent
PAGES = [ROOT / "README.md", ROOT / "DEVELOPERS.md", *sorted((ROOT / "docs").glob("*.md"))]
LINK = re.compile(r"\]\(([^)#\s]+)(#[^)\s]*)?\)")


def test_readme_is_short() -> None:
    assert len((ROOT / "README.md").read_text(encoding="utf-8").splitlines()) <= 150


@pytest.mark.parametrize("page", PAGES, ids=lambda p: p.relative_to(ROOT).as_posix())
def test_relative_links_resolve(page: Path) -> None:
    broken = [target for target, _ in LINK.findall(page.read_text(encoding="utf-8"))
              if not target.startswith(("http://", "https://", "mailto:")) and not (page.parent / target).exists()]
    assert broken == []


def test_the_readme_call_answers_what_the_readme_shows() -> None:
    from service import create_app

    app = create_app({"TESTING": True, "DATABASE_URL": "sqlite://"})
    body = json.loads((ROOT / "docs" / "examples" / "small_cross_section.json").read_text(encoding="utf-8"))
    report = app.test_client().post("/v1/assessments", json=body).get_json()
    readme = (ROOT / "README.md").read_text(encoding="utf-8")
    assert report["outcome"] == "pass"
    assert f'"value_kv_m": {report["maxima"]["e"]["value_kv_m"]:.4f}' in readme
    assert f'"value_ut": {report["maxima"]["b"]["value_ut"]:.4f}' in readme
    indices = [f'"exposure_index": {c["exposure_index"]:.3g}' for c in report["compliance"]]
    assert all(i in readme for i in indices), indices
    app.extensions["emf_storage"].engine.dispose()


def test_every_setting_is_documented() -> None:
    from service.config import ENVIRONMENT_VARIABLES

    text = (ROOT / "docs" / "operations.md").read_text(encoding="utf-8")
    assert [v for v in ENVIRONMENT_VARIABLES if v not in text] == []
