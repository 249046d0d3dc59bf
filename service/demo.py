"""``python -m service.demo``: start the service on SQLite, submit the demo scenario, keep serving.

Starts gunicorn with ``deploy/gunicorn.conf.py`` in the background on
``127.0.0.1:$EMF_PORT`` (default 8000; a free port is chosen, and said, if that one
is busy), waits for ``/healthz``, POSTs ``service/examples/demo_cross_section.json``
(a fictitious 400 kV double-circuit line), prints the assessment id and the report
URL, then serves until Ctrl-C.  The database is ``EMF_DATABASE_URL`` or, by default,
the SQLite file in ``instance/``.
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


def submit(base: str) -> dict:
    request = urllib.request.Request(base + "/v1/assessments", data=SCENARIO.read_bytes(), method="POST",
                                     headers={"Content-Type": "application/json"})
    try:
        with urllib.request.urlopen(request, timeout=120) as resp:
            return json.loads(resp.read())
    except urllib.error.HTTPError as exc:
        raise SystemExit(f"The demo scenario was refused ({exc.code}): {exc.read().decode(errors='replace')}")


def report_url(base: str, assessment_id: str) -> str:
    """The human-readable report if the service offers one, else the JSON record."""
    html = f"{base}/v1/assessments/{assessment_id}/report?format=html"  # HTML whatever the client sends
    try:
        req = urllib.request.Request(html, headers={"Accept": "text/html"})
        with urllib.request.urlopen(req, timeout=120) as resp:
            if resp.status == 200:
                return html
    except (urllib.error.URLError, OSError):
        pass
    return f"{base}/v1/assessments/{assessment_id}"


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
        report = submit(base)
        verdict = ", ".join(f"{c['level_id']} {c['quantity']}: {'pass' if c['passes'] else 'FAIL'}"
                            for c in report["compliance"])
        print(f"\nAssessment id: {report['id']}", flush=True)
        print(f"Report:        {report_url(base, report['id'])}", flush=True)
        print(f"JSON:          {base}/v1/assessments/{report['id']}", flush=True)
        print(f"Outcome:       {report['outcome']} ({verdict})", flush=True)
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
