"""Drive Debian's headless Chromium through the DevTools protocol, for report tests.

Why this shape: element sizes and console errors need the DevTools protocol
(``Runtime.evaluate`` for ``getBoundingClientRect``, ``Runtime.consoleAPICalled`` /
``Runtime.exceptionThrown`` / ``Log.entryAdded`` for errors); the one-shot
``--screenshot``/``--dump-dom`` flags cannot report either.  Chromium speaks the
protocol over a pair of pipes when started with ``--remote-debugging-pipe``
(commands read from fd 3, replies written to fd 4, each message a JSON text
terminated by a NUL byte), so no websocket client library and no debugging port
are needed: nothing is listening on the network, and nothing is added to the
project's dependencies.

Usage::

    with Chromium() as browser:
        page = browser.open("http://127.0.0.1:8000/v1/assessments/<id>/report")
        boxes = page.boxes("svg")
        page.screenshot("test-artifacts/report.png")
        assert not page.errors
"""

from __future__ import annotations

import base64
import json
import os
import queue
import shutil
import subprocess
import tempfile
import sys
import threading
import time
from dataclasses import dataclass, field
from pathlib import Path

CHROMIUM_FLAGS = (
    "--headless",
    "--no-sandbox",
    "--disable-gpu",
    "--disable-quic",
    "--no-first-run",
    "--disable-background-networking",
    "--disable-component-update",
    "--disable-sync",
    "--disable-dev-shm-usage",
    "--hide-scrollbars",
    "--mute-audio",
    "--remote-debugging-pipe",
)

_TRAMPOLINE = """
import fcntl, os, sys
a, b = (fcntl.fcntl(int(fd), fcntl.F_DUPFD, 10) for fd in sys.argv[1:3])
for fd in {int(sys.argv[1]), int(sys.argv[2])}:
    os.close(fd)
os.dup2(a, 3)
os.dup2(b, 4)
os.close(a)
os.close(b)
os.execv(sys.argv[3], sys.argv[3:])
"""


def find_chromium() -> str | None:
    """Path of a Chromium executable (env ``CHROMIUM`` first, then PATH), or None."""
    explicit = os.environ.get("CHROMIUM")
    if explicit:
        return explicit if Path(explicit).exists() else None
    for name in ("chromium", "chromium-browser"):
        path = shutil.which(name)
        if path:
            return path
    return None


class BrowserError(RuntimeError):
    """The browser did not start, answer, or finish loading in time."""


@dataclass
class Page:
    """One attached tab.  Collected diagnostics live in ``errors`` and ``requests``."""

    browser: "Chromium"
    session_id: str
    errors: list[str] = field(default_factory=list)
    requests: list[str] = field(default_factory=list)

    def send(self, method: str, params: dict | None = None) -> dict:
        return self.browser.send(method, params, session_id=self.session_id)

    def navigate(self, url: str) -> None:
        """Load ``url`` and wait for its load event."""
        self.browser.clear_events(self.session_id, "Page.loadEventFired")
        reply = self.send("Page.navigate", {"url": url})
        if reply.get("errorText"):
            raise BrowserError(f"navigation to {url} failed: {reply['errorText']}")
        self.browser.wait_event(self.session_id, "Page.loadEventFired")

    def evaluate(self, expression: str):
        """Evaluate a JavaScript expression in the page; return its JSON value."""
        reply = self.send(
            "Runtime.evaluate",
            {"expression": expression, "returnByValue": True, "awaitPromise": True},
        )
        if "exceptionDetails" in reply:
            raise BrowserError(f"evaluation failed: {reply['exceptionDetails'].get('text')}: {expression}")
        return reply["result"].get("value")

    def boxes(self, selector: str) -> list[dict]:
        """Bounding boxes (CSS px: x, y, width, height) of every element matching ``selector``.

        Also returns ``visible``: the element has a non-zero box and neither it nor an
        ancestor has ``display: none`` / ``visibility: hidden``.
        """
        js = (
            "Array.from(document.querySelectorAll(%s)).map(el => {"
            " const r = el.getBoundingClientRect();"
            " const s = getComputedStyle(el);"
            " return {x: r.x + scrollX, y: r.y + scrollY, width: r.width, height: r.height,"
            "  id: el.id || null, visible: r.width > 0 && r.height > 0 &&"
            "  s.visibility !== 'hidden' && el.checkVisibility()}; })"
        ) % json.dumps(selector)
        return self.evaluate(js)

    def text(self, selector: str = "body") -> str:
        """``innerText`` of the first element matching ``selector`` ('' if none)."""
        js = "(el => el ? el.innerText : '')(document.querySelector(%s))" % json.dumps(selector)
        return self.evaluate(js)

    def emulate_media(self, media: str) -> None:
        """Render as ``"print"`` or ``"screen"`` media."""
        self.send("Emulation.setEmulatedMedia", {"media": media})

    def screenshot(self, path: str | Path, *, full_page: bool = True) -> bytes:
        """Save a PNG screenshot (whole page by default) and return its bytes."""
        params: dict = {"format": "png"}
        if full_page:
            metrics = self.send("Page.getLayoutMetrics")
            size = metrics.get("cssContentSize") or metrics["contentSize"]
            params["captureBeyondViewport"] = True
            params["clip"] = {"x": 0, "y": 0, "width": size["width"], "height": size["height"], "scale": 1}
        data = base64.b64decode(self.send("Page.captureScreenshot", params)["data"])
        path = Path(path)
        path.parent.mkdir(parents=True, exist_ok=True)
        path.write_bytes(data)
        return data

    def print_pdf(self) -> bytes:
        """The page printed to PDF (A4, print CSS applied)."""
        reply = self.send(
            "Page.printToPDF", {"paperWidth": 8.27, "paperHeight": 11.69, "printBackground": True}
        )
        return base64.b64decode(reply["data"])


class Chromium:
    """A headless Chromium process driven over ``--remote-debugging-pipe``.

    Parameters
    ----------
    executable : str, optional
        Chromium binary; default :func:`find_chromium`.
    width_px, height_px : int
        Viewport size of opened pages.
    timeout_s : float
        Limit for every protocol reply and page load.
    """

    def __init__(self, executable: str | None = None, *, width_px: int = 1280,
                 height_px: int = 900, timeout_s: float = 30.0):
        self.executable = executable or find_chromium()
        if not self.executable:
            raise BrowserError("no chromium executable found (install Debian's chromium)")
        self.width_px, self.height_px, self.timeout_s = width_px, height_px, timeout_s
        self._next_id = 0
        self._replies: dict[int, queue.Queue] = {}
        self._events: list[dict] = []
        self._events_cv = threading.Condition()
        self._pages: dict[str, Page] = {}
        self._lock = threading.Lock()
        self.proc: subprocess.Popen | None = None

    # -- process ---------------------------------------------------------------
    def __enter__(self) -> "Chromium":
        self.start()
        return self

    def __exit__(self, *exc) -> None:
        self.close()

    def start(self) -> None:
        self._profile = tempfile.mkdtemp(prefix="emf-chromium-")
        cmd_r, self._cmd_w = os.pipe()      # we write commands, chromium reads fd 3
        self._res_r, res_w = os.pipe()      # chromium writes fd 4, we read
        argv = [self.executable, *CHROMIUM_FLAGS, f"--user-data-dir={self._profile}",
                f"--window-size={self.width_px},{self.height_px}", "about:blank"]
        # A tiny Python trampoline moves our two pipe ends onto fds 3 and 4, then
        # execs chromium (dash cannot redirect fds above 9, and the pipe ends may
        # themselves be 3 or 4 here).
        self._stderr = tempfile.TemporaryFile()
        self.proc = subprocess.Popen(
            [sys.executable, "-c", _TRAMPOLINE, str(cmd_r), str(res_w), *argv],
            pass_fds=(cmd_r, res_w), stdin=subprocess.DEVNULL,
            stdout=subprocess.DEVNULL, stderr=self._stderr,
        )
        os.close(cmd_r)
        os.close(res_w)
        self._reader = threading.Thread(target=self._read_loop, daemon=True)
        self._reader.start()
        self.send("Browser.getVersion")  # fails fast if the pipe protocol is not up

    def close(self) -> None:
        if self.proc is None:
            return
        try:
            if self.proc.poll() is None:
                try:
                    self.send("Browser.close", timeout_s=5)
                except BrowserError:
                    pass
                try:
                    self.proc.wait(timeout=10)
                except subprocess.TimeoutExpired:
                    self.proc.kill()
                    self.proc.wait(timeout=10)
        finally:
            for fd in (self._cmd_w, self._res_r):
                try:
                    os.close(fd)
                except OSError:
                    pass
            self._stderr.close()
            shutil.rmtree(self._profile, ignore_errors=True)
            self.proc = None

    def stderr_tail(self, n_chars: int = 2000) -> str:
        self._stderr.seek(0)
        return self._stderr.read().decode(errors="replace")[-n_chars:]

    # -- protocol --------------------------------------------------------------
    def _read_loop(self) -> None:
        buf = b""
        while True:
            try:
                chunk = os.read(self._res_r, 65536)
            except OSError:
                chunk = b""
            if not chunk:
                with self._events_cv:
                    self._events.append({"method": "__closed__"})
                    self._events_cv.notify_all()
                for q in list(self._replies.values()):
                    q.put({"error": {"message": "browser closed the pipe"}})
                return
            buf += chunk
            while b"\0" in buf:
                raw, buf = buf.split(b"\0", 1)
                self._dispatch(json.loads(raw))

    def _dispatch(self, msg: dict) -> None:
        if "id" in msg:
            q = self._replies.get(msg["id"])
            if q is not None:
                q.put(msg)
            return
        page = self._pages.get(msg.get("sessionId", ""))
        if page is not None:
            self._collect(page, msg)
        with self._events_cv:
            self._events.append(msg)
            self._events_cv.notify_all()

    @staticmethod
    def _collect(page: Page, msg: dict) -> None:
        method, params = msg.get("method"), msg.get("params", {})
        if method == "Runtime.consoleAPICalled" and params.get("type") in ("error", "assert"):
            args = " ".join(str(a.get("value", a.get("description", ""))) for a in params.get("args", []))
            page.errors.append(f"console.{params['type']}: {args}")
        elif method == "Runtime.exceptionThrown":
            details = params.get("exceptionDetails", {})
            desc = details.get("exception", {}).get("description") or details.get("text")
            page.errors.append(f"exception: {desc}")
        elif method == "Log.entryAdded" and params.get("entry", {}).get("level") == "error":
            entry = params["entry"]
            page.errors.append(f"log ({entry.get('source')}): {entry.get('text')} {entry.get('url', '')}".strip())
        elif method == "Network.requestWillBeSent":
            page.requests.append(params.get("request", {}).get("url", ""))

    def send(self, method: str, params: dict | None = None, *, session_id: str | None = None,
             timeout_s: float | None = None) -> dict:
        """Send one protocol command and return its ``result`` (raise on error or timeout)."""
        with self._lock:
            self._next_id += 1
            msg_id = self._next_id
            self._replies[msg_id] = q = queue.Queue()
        msg: dict = {"id": msg_id, "method": method, "params": params or {}}
        if session_id:
            msg["sessionId"] = session_id
        try:
            os.write(self._cmd_w, json.dumps(msg).encode() + b"\0")
            reply = q.get(timeout=timeout_s or self.timeout_s)
        except queue.Empty:
            raise BrowserError(f"no reply to {method} within {timeout_s or self.timeout_s} s") from None
        except OSError as exc:
            raise BrowserError(f"cannot talk to chromium ({exc}): {self.stderr_tail()}") from exc
        finally:
            self._replies.pop(msg_id, None)
        if "error" in reply:
            raise BrowserError(f"{method}: {reply['error'].get('message')}")
        return reply.get("result", {})

    def clear_events(self, session_id: str, method: str) -> None:
        with self._events_cv:
            self._events = [e for e in self._events
                            if not (e.get("sessionId") == session_id and e.get("method") == method)]

    def wait_event(self, session_id: str, method: str) -> dict:
        """Wait for (and consume) the next event ``method`` of the given session."""
        deadline = time.monotonic() + self.timeout_s
        with self._events_cv:
            while True:
                for i, e in enumerate(self._events):
                    if e.get("method") == "__closed__":
                        raise BrowserError(f"browser exited while waiting for {method}: {self.stderr_tail()}")
                    if e.get("sessionId") == session_id and e.get("method") == method:
                        return self._events.pop(i)
                remaining = deadline - time.monotonic()
                if remaining <= 0:
                    raise BrowserError(f"timed out waiting for {method}")
                self._events_cv.wait(remaining)

    # -- pages -----------------------------------------------------------------
    def open(self, url: str) -> Page:
        """Open a new tab, enable diagnostics, load ``url`` and return the page."""
        target = self.send("Target.createTarget", {"url": "about:blank"})["targetId"]
        session_id = self.send("Target.attachToTarget", {"targetId": target, "flatten": True})["sessionId"]
        page = Page(self, session_id)
        self._pages[session_id] = page
        for domain in ("Page", "Runtime", "Log", "Network"):
            page.send(f"{domain}.enable")
        page.send("Emulation.setDeviceMetricsOverride",
                  {"width": self.width_px, "height": self.height_px, "deviceScaleFactor": 1, "mobile": False})
        page.navigate(url)
        return page
