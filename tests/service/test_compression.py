"""Responses are gzip-compressed when the client asks (RFC 9110 Accept-Encoding), and never otherwise."""

from __future__ import annotations

import gzip
import json
from pathlib import Path

import pytest

EXAMPLES = Path(__file__).resolve().parents[2] / "service" / "examples"


@pytest.fixture
def demo() -> dict:
    return json.loads((EXAMPLES / "demo_cross_section.json").read_text(encoding="utf-8"))


def test_report_is_gzipped_on_request_and_decompresses_to_the_plain_answer(client, demo):
    created = client.post("/v1/assessments", json=demo)
    url = created.headers["Location"]
    plain = client.get(url)
    assert "Content-Encoding" not in plain.headers
    packed = client.get(url, headers={"Accept-Encoding": "gzip"})
    assert packed.headers["Content-Encoding"] == "gzip"
    assert "Accept-Encoding" in packed.headers["Vary"]
    assert gzip.decompress(packed.data) == plain.data
    assert len(packed.data) < len(plain.data) / 2


@pytest.mark.parametrize("fmt, mimetype", [("csv", "text/csv"), ("json", "application/json")])
def test_report_formats_are_gzipped(client, demo, fmt, mimetype):
    url = client.post("/v1/assessments", json=demo).headers["Location"]
    plain = client.get(f"{url}/report?format={fmt}")
    packed = client.get(f"{url}/report?format={fmt}", headers={"Accept-Encoding": "gzip"})
    assert packed.mimetype == mimetype and packed.headers["Content-Encoding"] == "gzip"
    assert gzip.decompress(packed.data) == plain.data


def test_evaluate_is_gzipped_and_small_answers_are_not(client, demo):
    packed = client.post("/v1/evaluate", json=demo, headers={"Accept-Encoding": "gzip"})
    assert packed.headers["Content-Encoding"] == "gzip"
    assert json.loads(gzip.decompress(packed.data))["kind"] == "cross_section"
    health = client.get("/healthz", headers={"Accept-Encoding": "gzip"})
    assert "Content-Encoding" not in health.headers  # below COMPRESS_MIN_SIZE


def test_compress_level_is_checked():
    from service import create_app

    with pytest.raises(ValueError, match="COMPRESS_LEVEL"):
        create_app({"DATABASE_URL": "sqlite://", "COMPRESS_LEVEL": 0, "WARM_UP_ENGINE": False})
