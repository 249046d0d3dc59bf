"""Write the golden files: ``python -m tests.service.golden.make`` (from the repository root).

For every scenario of :mod:`tests.service.golden.scenarios`: the ``POST /v1/evaluate``
answer (``<name>.json.gz``), its CSV (``.csv.gz``), its GeoJSON for routes
(``.geojson.gz``) and the HTML page's text outside the figures (``.html.gz``), each
rendered with a fixed id and creation time.  Also ``records.sqlite3.gz``: a database
holding stored assessments of three scenarios, written by the service of the day, so
that later code can be checked to still verify them.
"""

from __future__ import annotations

import gzip
import shutil
import sys
import tempfile
from pathlib import Path

from .scenarios import HERE, scenarios
from .render import RECORD_SCENARIOS, rendered


def _write(path: Path, text: str) -> None:
    with gzip.GzipFile(path, "wb", mtime=0) as fh:
        fh.write(text.encode("utf-8"))


def main(argv: list[str] | None = None) -> int:
    """``--only SUFFIX ...`` rewrites just those renderings (e.g. ``--only geojson`` after an intended GeoJSON change)."""
    from service import create_app

    argv = sys.argv[1:] if argv is None else argv
    only = set(argv[argv.index("--only") + 1:]) if "--only" in argv else None

    app = create_app({"TESTING": True, "DATABASE_URL": "sqlite://", "WARM_UP_ENGINE": False})
    client = app.test_client()
    for name, body in scenarios().items():
        for suffix, text in rendered(client, body).items():
            if only is None or suffix in only:
                _write(HERE / f"{name}.{suffix}.gz", text)
        print("wrote", name)
    if only is not None:
        return 0
    with tempfile.TemporaryDirectory() as tmp:
        db = Path(tmp) / "records.sqlite3"
        app = create_app({"TESTING": True, "DATABASE_URL": f"sqlite:///{db}", "WARM_UP_ENGINE": False})
        client = app.test_client()
        for name in RECORD_SCENARIOS:
            response = client.post("/v1/assessments", json=scenarios()[name])
            assert response.status_code == 201, response.get_json()
        app.extensions["emf_storage"].engine.dispose()
        with open(db, "rb") as src, gzip.GzipFile(HERE / "records.sqlite3.gz", "wb", mtime=0) as dst:
            shutil.copyfileobj(src, dst)
    print("wrote records.sqlite3.gz")
    return 0


if __name__ == "__main__":
    sys.exit(main())
