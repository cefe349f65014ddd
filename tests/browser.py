"""Open a local page in headless Chromium and report what a person would see.

Drives the browser over the DevTools protocol on a pipe (--remote-debugging-pipe: messages
are JSON, each ended by a NUL byte, on file descriptors 3 (to the browser) and 4 (from it)),
so no port is opened and no websocket library is needed. The browser runs with a fresh
profile, without network services, and is ended by its process id.
"""

from __future__ import annotations

import base64
import json
import os
import select
import shutil
import subprocess
import tempfile
import time
from dataclasses import dataclass, field
from pathlib import Path

#: Flags that keep the browser off the network and quiet (no sandbox: CI runs as root).
CHROMIUM_FLAGS = (
    "--headless",
    "--no-sandbox",
    "--disable-gpu",
    "--disable-background-networking",
    "--disable-component-update",
    "--no-first-run",
    "--disable-sync",
    "--disable-extensions",
    "--disable-default-apps",
    "--mute-audio",
    "--remote-debugging-pipe",
)
#: Longest wait for any one answer or for the page's load event, s.
TIMEOUT_S = 30.0


def chromium_path() -> str | None:
    for name in ("chromium", "chromium-browser"):
        found = shutil.which(name)
        if found:
            return found
    return None


@dataclass
class PageVisit:
    """What loading a page gave: console errors and exceptions, every URL it requested,
    the values of the expressions asked for, and a PNG screenshot."""

    errors: list[str] = field(default_factory=list)
    requests: list[str] = field(default_factory=list)
    values: dict[str, object] = field(default_factory=dict)
    screenshot_png: bytes = b""


class _Pipe:
    def __init__(self, to_browser: int, from_browser: int) -> None:
        self.to_browser, self.from_browser = to_browser, from_browser
        self.buffer = b""
        self.next_id = 0
        self.events: list[dict] = []

    def send(self, method: str, params: dict | None = None, session: str | None = None) -> int:
        self.next_id += 1
        message = {"id": self.next_id, "method": method, "params": params or {}}
        if session:
            message["sessionId"] = session
        os.write(self.to_browser, json.dumps(message).encode() + b"\0")
        return self.next_id

    def _read_one(self, deadline: float) -> dict:
        while b"\0" not in self.buffer:
            left = deadline - time.monotonic()
            if left <= 0:
                raise TimeoutError("the browser did not answer in time")
            ready, _, _ = select.select([self.from_browser], [], [], left)
            if ready:
                chunk = os.read(self.from_browser, 1 << 20)
                if not chunk:
                    raise RuntimeError("the browser closed the pipe")
                self.buffer += chunk
        raw, self.buffer = self.buffer.split(b"\0", 1)
        return json.loads(raw)

    def call(self, method: str, params: dict | None = None, session: str | None = None) -> dict:
        wanted = self.send(method, params, session)
        deadline = time.monotonic() + TIMEOUT_S
        while True:
            message = self._read_one(deadline)
            if message.get("id") == wanted:
                if "error" in message:
                    raise RuntimeError(f"{method}: {message['error']}")
                return message.get("result", {})
            self.events.append(message)

    def wait_event(self, method: str) -> dict:
        deadline = time.monotonic() + TIMEOUT_S
        for i, event in enumerate(self.events):
            if event.get("method") == method:
                return self.events.pop(i)
        while True:
            message = self._read_one(deadline)
            if message.get("method") == method:
                return message
            self.events.append(message)


def _collect(events: list[dict], visit: PageVisit) -> None:
    for event in events:
        method, params = event.get("method"), event.get("params", {})
        if method == "Runtime.consoleAPICalled" and params.get("type") in ("error", "assert"):
            args = " ".join(str(a.get("value", a.get("description", ""))) for a in params["args"])
            visit.errors.append(f"console.{params['type']}: {args}")
        elif method == "Runtime.exceptionThrown":
            details = params["exceptionDetails"]
            text = details.get("exception", {}).get("description") or details.get("text")
            visit.errors.append(f"exception: {text}")
        elif method == "Log.entryAdded" and params["entry"].get("level") == "error":
            entry = params["entry"]
            visit.errors.append(
                f"log {entry.get('source')}: {entry.get('text')} {entry.get('url', '')}"
            )
        elif method == "Network.requestWillBeSent":
            visit.requests.append(params["request"]["url"])


def _place_pipe_ends(read_end: int, write_end: int) -> None:
    """In the child: the browser's ends of the pipes as fds 3 and 4 (via fds >= 10, so that
    neither end is overwritten by the other's dup2)."""
    import fcntl

    high_read = fcntl.fcntl(read_end, fcntl.F_DUPFD, 10)
    high_write = fcntl.fcntl(write_end, fcntl.F_DUPFD, 10)
    os.dup2(high_read, 3)
    os.dup2(high_write, 4)


def visit_page(
    page: Path, *, width: int = 1280, height: int = 1600, expressions: dict[str, str] | None = None
) -> PageVisit:
    """Load a local file, wait for its load event and a little settling, then evaluate the
    expressions (name -> JavaScript, run in the page after load), take a full-width screenshot
    of the viewport and gather errors and requests seen since the start."""
    binary = chromium_path()
    if binary is None:
        raise FileNotFoundError("chromium")
    to_read, to_browser = os.pipe()  # browser reads fd 3
    from_browser, to_write = os.pipe()  # browser writes fd 4
    visit = PageVisit()
    with tempfile.TemporaryDirectory(prefix="reachgate-browser-") as profile:
        process = subprocess.Popen(
            [binary, *CHROMIUM_FLAGS, f"--user-data-dir={profile}", "about:blank"],
            stdin=subprocess.DEVNULL,
            stdout=subprocess.DEVNULL,
            stderr=subprocess.DEVNULL,
            pass_fds=(3, 4),  # kept open past the close_fds step that follows preexec_fn
            preexec_fn=lambda: _place_pipe_ends(to_read, to_write),
        )
        os.close(to_read)
        os.close(to_write)
        pipe = _Pipe(to_browser, from_browser)
        try:
            target = pipe.call("Target.createTarget", {"url": "about:blank"})["targetId"]
            session = pipe.call("Target.attachToTarget", {"targetId": target, "flatten": True})[
                "sessionId"
            ]
            for domain in ("Page", "Runtime", "Log", "Network"):
                pipe.call(f"{domain}.enable", session=session)
            pipe.call(
                "Emulation.setDeviceMetricsOverride",
                {"width": width, "height": height, "deviceScaleFactor": 1, "mobile": False},
                session=session,
            )
            pipe.events.clear()  # about:blank's own events
            pipe.call("Page.navigate", {"url": page.resolve().as_uri()}, session=session)
            pipe.wait_event("Page.loadEventFired")
            for name, expression in (expressions or {}).items():
                result = pipe.call(
                    "Runtime.evaluate",
                    {"expression": expression, "returnByValue": True},
                    session=session,
                )
                visit.values[name] = result["result"].get("value")
            shot = pipe.call("Page.captureScreenshot", {"format": "png"}, session=session)
            visit.screenshot_png = base64.b64decode(shot["data"])
            _collect(pipe.events, visit)
            try:
                pipe.call("Browser.close")
            except (RuntimeError, TimeoutError):
                pass
        finally:
            os.close(to_browser)
            os.close(from_browser)
            try:
                process.wait(timeout=10)
            except subprocess.TimeoutExpired:
                process.kill()
                process.wait()
    return visit
