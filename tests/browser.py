"""Opening a page in a real browser, headless Chromium (Debian's `chromium`), and hearing what it says about it.

The browser is driven over the Chrome DevTools Protocol on a pipe (`--remote-debugging-pipe`: the browser reads
commands on its file descriptor 3 and writes replies and events on 4, each message a JSON text ended by a NUL
byte), with the standard library only. Over the protocol the browser reports, per page: console messages with
their level (`Runtime.consoleAPICalled`), what it logs itself (`Log.entryAdded`: SVG attributes it cannot parse,
resources it could not load, deprecations), uncaught exceptions (`Runtime.exceptionThrown`), the issues its
DevTools panel would list (`Audits.issueAdded`), and every request and failed load (`Network.requestWillBeSent`,
`Network.loadingFailed`). Its stderr log (`--enable-logging=stderr`) carries console text without a level and
no failed loads, so it is not used.
"""

from __future__ import annotations

import base64
import fcntl
import json
import os
import select
import shutil
import signal
import subprocess
import sys
import tempfile
import time
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np

from tests.pixels import decode_png

CHROMIUM = "chromium"  # Debian's package and command name (`apt-get install chromium`)
FLAGS = (
    "--headless=new",  # no window; the full browser rather than the separate headless shell
    "--no-sandbox",  # CI runs as root in a container, where Chromium's sandbox refuses to start
    "--disable-gpu",  # no GPU in CI: software rendering
    "--disable-dev-shm-usage",  # containers give /dev/shm little room; shared memory goes to the temp folder
    "--remote-debugging-pipe",
    "--no-first-run",
    "--no-default-browser-check",
    "--disable-extensions",
    "--disable-background-networking",
    "--disable-component-update",
    "--disable-sync",
    "--host-resolver-rules=MAP * ~NOTFOUND",  # no host name resolves: what a page fetches from the net fails
    "--hide-scrollbars",  # the screenshot is the page only
    "--force-device-scale-factor=1",  # one CSS pixel, one screenshot pixel
)
TIMEOUT_S = 60.0  # for the browser to start, or to answer one command


class BrowserError(RuntimeError):
    pass


def chromium_command() -> str:
    """The browser's path; a missing browser fails the test (the browser is the reference, so no skip)."""
    path = shutil.which(CHROMIUM)
    if path is None:
        raise BrowserError(
            f"{CHROMIUM} is not on PATH: the browser tests need it (Debian: apt-get install chromium; "
            ".ci/run installs it)."
        )
    return path


@dataclass
class Page:
    """One page the browser opened, with everything it said while loading and drawing it."""

    browser: Browser
    session: str
    url: str
    events: list[dict] = field(default_factory=list)

    def evaluate(self, expression: str) -> Any:
        """The value of a JavaScript expression in the page (a promise is awaited), as JSON data."""
        result = self.browser.call(
            "Runtime.evaluate",
            {"expression": expression, "returnByValue": True, "awaitPromise": True},
            self.session,
        )
        if "exceptionDetails" in result:
            raise BrowserError(f"{expression[:60]}…: {result['exceptionDetails']}")
        return result["result"].get("value")

    def screenshot(self, clip: dict[str, float] | None = None) -> np.ndarray:
        """RGB pixels (height, width, 3) of the window, or of ``clip`` (x, y, width, height in page CSS px)."""
        # optimizeForSpeed: Chromium then filters every PNG row with "up" only, which decodes fast in numpy
        params: dict[str, Any] = {"format": "png", "optimizeForSpeed": True}
        if clip is not None:
            params |= {"clip": {**clip, "scale": 1}, "captureBeyondViewport": True}
        shot = self.browser.call("Page.captureScreenshot", params, self.session)
        return decode_png(base64.b64decode(shot["data"]))

    def _of(self, method: str) -> list[dict]:
        self.events.extend(self.browser.take_events(self.session))
        return [e["params"] for e in self.events if e.get("method") == method]

    @property
    def messages(self) -> list[str]:
        """Every warning and error: console messages, the browser's log, uncaught exceptions, DevTools issues."""
        said = [
            f"console.{p['type']}: " + " ".join(str(a.get("value", a.get("description", ""))) for a in p["args"])
            for p in self._of("Runtime.consoleAPICalled")
            if p["type"] in ("error", "warning", "assert")
        ]
        said += [
            f"log {e['level']} ({e['source']}): {e['text']} {e.get('url', '')}".rstrip()
            for e in (p["entry"] for p in self._of("Log.entryAdded"))
            if e["level"] in ("error", "warning")
        ]
        said += [
            f"exception: {d.get('exception', {}).get('description', d.get('text'))}"
            for d in (p["exceptionDetails"] for p in self._of("Runtime.exceptionThrown"))
        ]
        said += [
            f"issue {p['issue']['code']}: {json.dumps(p['issue']['details'])}" for p in self._of("Audits.issueAdded")
        ]
        return said

    @property
    def requests(self) -> list[str]:
        """The URL of every request the page made, the document's own first."""
        return [p["request"]["url"] for p in self._of("Network.requestWillBeSent")]

    @property
    def failed_loads(self) -> list[str]:
        """`URL: error` of every load that failed."""
        urls = {p["requestId"]: p["request"]["url"] for p in self._of("Network.requestWillBeSent")}
        return [f"{urls.get(p['requestId'], '?')}: {p['errorText']}" for p in self._of("Network.loadingFailed")]


class Browser:
    """One headless Chromium for a module's pages: ``with Browser() as browser: page = browser.open(path)``."""

    def __init__(self) -> None:
        executable = chromium_command()
        self._profile = tempfile.TemporaryDirectory(prefix="leakbudget-chromium-")
        self._stderr = open(Path(self._profile.name) / "stderr.txt", "w+b")  # noqa: SIM115 (closed in close())
        self._buffer = b""
        self._next_id = 0
        self._events: list[dict] = []
        commands_read, commands_write = os.pipe()
        replies_read, replies_write = os.pipe()
        # The browser wants its two pipe ends as descriptors 3 and 4. A small Python step dups them into place
        # and execs the browser (from descriptors 10 and up, so the dups cannot overwrite each other).
        ends = [fcntl.fcntl(fd, fcntl.F_DUPFD_CLOEXEC, 10) for fd in (commands_read, replies_write)]
        for fd in (commands_read, replies_write):
            os.close(fd)
        step = (
            f"import os, sys; os.dup2({ends[0]}, 3); os.dup2({ends[1]}, 4); os.close({ends[0]}); "
            f"os.close({ends[1]}); os.execv(sys.argv[1], sys.argv[1:])"
        )
        command = [executable, *FLAGS, f"--user-data-dir={self._profile.name}", "about:blank"]
        self.process = subprocess.Popen(
            [sys.executable, "-c", step, *command],
            pass_fds=ends,
            stdin=subprocess.DEVNULL,
            stdout=subprocess.DEVNULL,
            stderr=self._stderr,
            start_new_session=True,  # the browser's helper processes share its group, so a kill reaches them
        )
        for fd in ends:
            os.close(fd)
        self._send = os.fdopen(commands_write, "wb", buffering=0)
        self._receive = replies_read
        self.version = self.call("Browser.getVersion")["product"]

    def __enter__(self) -> Browser:
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()

    def close(self) -> None:
        try:
            self.call("Browser.close")
        except (BrowserError, OSError):
            pass
        try:
            self.process.wait(timeout=10)
        except subprocess.TimeoutExpired:
            os.killpg(self.process.pid, signal.SIGKILL)  # the process group of this browser and its helpers
            self.process.wait()
        self._send.close()
        os.close(self._receive)
        self._stderr.close()
        self._profile.cleanup()

    def _stderr_tail(self) -> str:
        self._stderr.flush()
        self._stderr.seek(0)
        return self._stderr.read().decode(errors="replace")[-2000:]

    def _read_message(self, deadline: float) -> dict:
        while b"\0" not in self._buffer:
            ready, _, _ = select.select([self._receive], [], [], max(0.0, deadline - time.monotonic()))
            if not ready:
                raise BrowserError(
                    f"{CHROMIUM} did not answer within {TIMEOUT_S:.0f} s; its log:\n{self._stderr_tail()}"
                )
            chunk = os.read(self._receive, 1 << 16)
            if not chunk:
                raise BrowserError(f"{CHROMIUM} closed its pipe (exited?); its log:\n{self._stderr_tail()}")
            self._buffer += chunk
        message, self._buffer = self._buffer.split(b"\0", 1)
        return json.loads(message)

    def call(self, method: str, params: dict | None = None, session: str | None = None) -> dict:
        """Send one command and return its result; events that arrive meanwhile are kept for their page."""
        self._next_id += 1
        message: dict[str, Any] = {"id": self._next_id, "method": method, "params": params or {}}
        if session is not None:
            message["sessionId"] = session
        self._send.write(json.dumps(message).encode() + b"\0")
        deadline = time.monotonic() + TIMEOUT_S
        while True:
            reply = self._read_message(deadline)
            if reply.get("id") == self._next_id:
                if "error" in reply:
                    raise BrowserError(f"{method}: {reply['error']}")
                return reply["result"]
            if reply.get("method") == "Inspector.targetCrashed":
                raise BrowserError(f"the page crashed; the browser's log:\n{self._stderr_tail()}")
            self._events.append(reply)

    def take_events(self, session: str) -> list[dict]:
        mine = [e for e in self._events if e.get("sessionId") == session]
        self._events = [e for e in self._events if e.get("sessionId") != session]
        return mine

    def _wait_for_load(self, session: str, loader: str) -> None:
        """Until the page's load event of the navigation ``loader`` (not an earlier one of about:blank)."""
        deadline = time.monotonic() + TIMEOUT_S

        def loaded(e: dict) -> bool:
            p = e.get("params", {})
            return (
                e.get("sessionId") == session
                and e.get("method") == "Page.lifecycleEvent"
                and p.get("name") == "load"
                and p.get("loaderId") == loader
            )

        while not any(loaded(e) for e in self._events):
            self._events.append(self._read_message(deadline))

    def open(self, path: Path, width: int = 1100, height: int = 800) -> Page:
        """Load a file in a new tab of ``width`` × ``height`` CSS px, wait until it is loaded and drawn."""
        target = self.call("Target.createTarget", {"url": "about:blank"})["targetId"]
        session = self.call("Target.attachToTarget", {"targetId": target, "flatten": True})["sessionId"]
        for domain in ("Runtime", "Log", "Network", "Page", "Audits", "Inspector"):
            self.call(f"{domain}.enable", {}, session)
        self.call("Page.setLifecycleEventsEnabled", {"enabled": True}, session)
        self.call(
            "Emulation.setDeviceMetricsOverride",
            {"width": width, "height": height, "deviceScaleFactor": 1, "mobile": False},
            session,
        )
        url = Path(path).resolve().as_uri()
        navigated = self.call("Page.navigate", {"url": url}, session)
        if navigated.get("errorText"):
            raise BrowserError(f"{url}: {navigated['errorText']}")
        self._wait_for_load(session, navigated["loaderId"])
        page = Page(self, session, url)
        # drawn: its fonts loaded and two frames painted after that
        page.evaluate(
            "document.fonts.ready.then(() => new Promise(done => requestAnimationFrame(() => "
            "requestAnimationFrame(done))))"
        )
        return page
