"""``python -m service.demo``: start the service on SQLite, submit the demo scenario, keep serving.

Starts gunicorn with ``deploy/gunicorn.conf.py`` in the background on
``127.0.0.1:$EMF_PORT`` (default 8000; a free port is chosen, and said, if that one
is busy), waits for ``/healthz``, POSTs ``service/examples/demo_cross_section.json``
(a fictitious 400 kV double-circuit line), prints the assessment id and the report
URL, then serves until Ctrl-C.  The database is ``EMF_DATABASE_URL`` or, by default,
the SQLite file in ``instance/``.

Access control is on (unless ``EMF_AUTH_REQUIRED=false``): the demo creates a key of
organisation ``demo`` (role ``submit``), prints it once, and uses it.  A browser sends
no key, so the HTML report is also saved as ``instance/demo-report.html``.
"""

from __future__ import annotations

import json
import os
import signal
import socket
import subprocess
import sys
import time
import urllib.error
import urllib.request
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
SCENARIO = Path(__file__).resolve().parent / "examples" / "demo_cross_section.json"
HOST = "127.0.0.1"


def port_is_free(port: int) -> bool:
    with socket.socket(socket.AF_INET, socket.SOCK_STREAM) as sock:
        sock.setsockopt(socket.SOL_SOCKET, socket.SO_REUSEADDR, 1)
        try:
            sock.bind((HOST, port))
        except OSError:
            return False
    return True


def free_port() -> int:
    with socket.socket(socket.AF_INET, socket.SOCK_STREAM) as sock:
        sock.bind((HOST, 0))
        return sock.getsockname()[1]


def choose_port() -> int:
    wanted = int(os.environ.get("EMF_PORT", "8000"))
    if port_is_free(wanted):
        return wanted
    port = free_port()
    print(f"Port {wanted} is busy; using port {port} instead (set EMF_PORT to choose).", flush=True)
    return port


def wait_healthy(base: str, server: subprocess.Popen, timeout_s: float = 120.0) -> None:
    deadline = time.monotonic() + timeout_s
    while time.monotonic() < deadline:
        if server.poll() is not None:
            raise SystemExit(f"gunicorn exited with code {server.returncode} before the service was up.")
        try:
            with urllib.request.urlopen(base + "/healthz", timeout=2) as resp:
                if resp.status == 200:
                    return
        except (urllib.error.URLError, OSError):
            pass
        time.sleep(0.3)
    raise SystemExit(f"The service did not answer {base}/healthz within {timeout_s:.0f} s.")


def auth_required() -> bool:
    """As the service will read ``EMF_AUTH_REQUIRED`` (JSON: ``false`` turns access control off)."""
    return os.environ.get("EMF_AUTH_REQUIRED", "true").strip().lower() not in ("false", "0")


def demo_key() -> str:
    """A new key of organisation ``demo`` with role ``submit``, created on the service's database."""
    from service import access, create_app, storage

    app = create_app({"WARM_UP_ENGINE": False, "BATCH_WORKER": False, "LOG_LEVEL": "WARNING"})
    try:
        with storage.storage_of(app).sessionmaker() as session, session.begin():
            return access.create_key(session, tenant="demo", role="submit", label="quick-start demo key").token
    finally:
        storage.storage_of(app).engine.dispose()


def _headers(key: str | None, **more: str) -> dict[str, str]:
    return {**more, **({"Authorization": f"Bearer {key}"} if key else {})}


def submit(base: str, key: str | None = None) -> dict:
    request = urllib.request.Request(base + "/v1/assessments", data=SCENARIO.read_bytes(), method="POST",
                                     headers=_headers(key, **{"Content-Type": "application/json"}))
    try:
        with urllib.request.urlopen(request, timeout=120) as resp:
            return json.loads(resp.read())
    except urllib.error.HTTPError as exc:
        raise SystemExit(f"The demo scenario was refused ({exc.code}): {exc.read().decode(errors='replace')}")


def save_report(base: str, assessment_id: str, key: str | None) -> Path | None:
    """Save the printable HTML report to ``instance/demo-report.html``; None if it could not be fetched."""
    html = f"{base}/v1/assessments/{assessment_id}/report?format=html"  # HTML whatever the client sends
    try:
        req = urllib.request.Request(html, headers=_headers(key, Accept="text/html"))
        with urllib.request.urlopen(req, timeout=120) as resp:
            page = resp.read()
    except (urllib.error.URLError, OSError):
        return None
    path = ROOT / "instance" / "demo-report.html"
    path.parent.mkdir(exist_ok=True)
    path.write_bytes(page)
    return path


def _stop(signum: int, frame: object) -> None:
    raise KeyboardInterrupt


def main() -> int:
    # Stop gunicorn too when asked to stop; SIGINT explicitly, because a shell that starts
    # us in the background sets it to "ignore", which Python would keep.
    signal.signal(signal.SIGTERM, _stop)
    signal.signal(signal.SIGINT, _stop)
    port = choose_port()
    base = f"http://{HOST}:{port}"
    env = {**os.environ, "HOST": HOST, "PORT": str(port)}
    env.setdefault("WEB_CONCURRENCY", "2")
    server = subprocess.Popen([sys.executable, "-m", "gunicorn", "-c", str(ROOT / "deploy" / "gunicorn.conf.py")],
                              cwd=ROOT, env=env, stdout=sys.stderr)  # server logs on stderr, our lines on stdout
    try:
        print(f"Starting emf-assess on {base} ...", flush=True)
        wait_healthy(base, server)
        key = demo_key() if auth_required() else None
        report = submit(base, key)
        verdict = ", ".join(f"{c['level_id']} {c['quantity']}: {'pass' if c['passes'] else 'FAIL'}"
                            for c in report["compliance"])
        saved = save_report(base, report["id"], key)
        print(f"\nAssessment id: {report['id']}", flush=True)
        print(f"Report:        {base}/v1/assessments/{report['id']}/report?format=html", flush=True)
        if saved is not None:
            print(f"Saved report:  {saved}", flush=True)
        print(f"JSON:          {base}/v1/assessments/{report['id']}", flush=True)
        print(f"Outcome:       {report['outcome']} ({verdict})", flush=True)
        if key:
            print(f"Demo key:      {key}\n               (organisation 'demo', role submit; shown once, send it as "
                  "Authorization: Bearer <key>)", flush=True)
            print(f"Try:           curl -H 'Authorization: Bearer {key}' {base}/v1/assessments", flush=True)
        print(f"API document:  {base}/openapi.json\nServing until Ctrl-C.", flush=True)
        return server.wait()
    except KeyboardInterrupt:
        print("\nStopping.", flush=True)
        return 0
    finally:
        if server.poll() is None:
            server.send_signal(signal.SIGTERM)
            try:
                server.wait(timeout=30)
            except subprocess.TimeoutExpired:
                server.kill()


if __name__ == "__main__":
    sys.exit(main())
