"""The HTML report in a real browser (Debian's headless Chromium, via tests/service/browser.py).

The service runs in a thread (werkzeug's WSGI server on a free localhost port, SQLite
file database); the test stores the demo scenario over HTTP, opens its report URL,
keeps a screenshot under test-artifacts/ and checks what a reader needs: the verdict,
the profile plot and the cross-section drawing are visible with a useful size, the
page loads nothing but itself (self-contained) and logs no console errors, and it
prints to a PDF.

Without chromium: skipped with a reason, or a failure when ``CI`` is set.
"""

from __future__ import annotations

import json
import os
import threading
import urllib.request
from pathlib import Path

import pytest

from service import create_app

from .browser import BrowserError, Chromium, find_chromium

pytestmark = pytest.mark.browser

ROOT = Path(__file__).resolve().parents[2]
DEMO = ROOT / "service" / "examples" / "demo_cross_section.json"
ARTIFACTS = ROOT / "test-artifacts"


@pytest.fixture(scope="module")
def chromium_path() -> str:
    path = find_chromium()
    if path is None:
        reason = "chromium not installed (Debian: apt-get install -y chromium)"
        if os.environ.get("CI"):
            pytest.fail(reason + "; CI is set, so the browser check is required")
        pytest.skip(reason)
    return path


@pytest.fixture(scope="module")
def service_url(tmp_path_factory):
    """Base URL of the service running in a background thread."""
    from werkzeug.serving import make_server

    db = tmp_path_factory.mktemp("browser") / "reports.sqlite3"
    app = create_app({"DATABASE_URL": f"sqlite:///{db}"})
    server = make_server("127.0.0.1", 0, app, threaded=True)
    thread = threading.Thread(target=server.serve_forever, daemon=True)
    thread.start()
    yield f"http://127.0.0.1:{server.server_port}"
    server.shutdown()
    thread.join(timeout=10)
    server.server_close()
    app.extensions["emf_storage"].engine.dispose()


def post_demo(base: str) -> dict:
    req = urllib.request.Request(base + "/v1/assessments", data=DEMO.read_bytes(), method="POST",
                                 headers={"Content-Type": "application/json"})
    with urllib.request.urlopen(req, timeout=60) as resp:
        assert resp.status == 201
        return json.load(resp)


def test_demo_report_is_readable_in_chromium(chromium_path, service_url):
    report = post_demo(service_url)
    url = f"{service_url}/v1/assessments/{report['id']}/report?format=html"
    try:
        with Chromium(chromium_path, width_px=1280, height_px=1000) as browser:
            page = browser.open(url)
            shot = page.screenshot(ARTIFACTS / "report-demo.png")
            verdict = page.boxes("#verdict")
            profile = page.boxes("#profile figure svg")
            drawing = page.boxes("#drawing svg")
            verdict_text = page.text("#verdict")
            title = page.evaluate("document.title")
            page.emulate_media("print")
            printed_drawing = page.boxes("#drawing svg")
            pdf = page.print_pdf()
            page.screenshot(ARTIFACTS / "report-demo-print.png")
            errors, requests = list(page.errors), list(page.requests)
    except BrowserError as exc:
        pytest.fail(f"headless chromium failed: {exc}")

    assert shot[:8] == b"\x89PNG\r\n\x1a\n" and len(shot) > 50_000
    assert errors == [], errors
    assert requests == [url], f"the report loaded other resources: {requests}"
    assert report["title"] in title

    # The verdict is at the top of the page and says PASS or FAIL in words.
    assert len(verdict) == 1 and verdict[0]["visible"] and verdict[0]["y"] < 300
    assert ("FAIL" if report["outcome"] == "fail" else "PASS") in verdict_text
    # Plot and drawing are visible and large enough to read on a 1280 px wide page.
    for name, boxes in (("profile plot", profile), ("cross-section drawing", drawing)):
        assert boxes, f"{name} missing"
        box = boxes[0]
        assert box["visible"], name
        assert box["width"] >= 800 and box["height"] >= 300, (name, box)
    assert printed_drawing[0]["visible"] and printed_drawing[0]["width"] > 400
    assert pdf[:5] == b"%PDF-" and len(pdf) > 20_000
