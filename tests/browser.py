"""Headless Chromium driven through the DevTools protocol, for the report page tests.

    with Browser.start() as browser:
        page = browser.open(path)        # waits for the charts to render
        page.console_errors, page.requests, page.evaluate("1 + 1"), page.screenshot()

Chromium is started with a new empty profile and without its background traffic
(``FLAGS``), on a DevTools port it picks itself (``--remote-debugging-port=0``, read back
from ``DevToolsActivePort``). Console errors, uncaught exceptions and every network
request the page makes are collected from the protocol's events.
"""

from __future__ import annotations

import base64
import json
import os
import shutil
import subprocess
import tempfile
import time
from pathlib import Path

CHROMIUM_NAMES = ("chromium", "chromium-browser", "google-chrome")
FLAGS = ("--headless", "--no-sandbox", "--disable-gpu", "--no-first-run",
         "--disable-background-networking", "--disable-component-update", "--disable-sync")


class BrowserUnavailable(Exception):
    pass


def find_chromium() -> str | None:
    for name in CHROMIUM_NAMES:
        found = shutil.which(name)
        if found:
            return found
    return None


class Browser:
    def __init__(self, process: subprocess.Popen, profile: str, socket):
        self.process, self.profile, self.socket = process, profile, socket
        self._next = 0
        self.events: list[dict] = []

    @classmethod
    def start(cls, timeout: float = 60) -> Browser:
        import websocket

        binary = find_chromium()
        if binary is None:
            raise BrowserUnavailable("no chromium on PATH (.ci/setup_engines.sh installs it)")
        profile = tempfile.mkdtemp(prefix="sqlgen-chromium-")
        process = subprocess.Popen(
            [binary, *FLAGS, f"--user-data-dir={profile}", "--remote-debugging-port=0",
             "about:blank"], stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
        port_file = Path(profile) / "DevToolsActivePort"
        deadline = time.monotonic() + timeout
        while not port_file.exists() or len(port_file.read_text().splitlines()) < 2:
            if process.poll() is not None or time.monotonic() > deadline:
                process.kill()
                shutil.rmtree(profile, ignore_errors=True)
                raise BrowserUnavailable("chromium did not open its DevTools port")
            time.sleep(0.05)
        port, path = port_file.read_text().splitlines()[:2]
        socket = websocket.create_connection(f"ws://127.0.0.1:{port}{path}", timeout=timeout,
                                             suppress_origin=True)
        return cls(process, profile, socket)

    def send(self, method: str, params: dict | None = None, session: str | None = None,
             timeout: float = 60) -> dict:
        self._next += 1
        message = {"id": self._next, "method": method, "params": params or {}}
        if session:
            message["sessionId"] = session
        self.socket.send(json.dumps(message))
        deadline = time.monotonic() + timeout
        while time.monotonic() < deadline:
            reply = json.loads(self.socket.recv())
            if reply.get("id") == self._next:
                if "error" in reply:
                    raise RuntimeError(f"{method}: {reply['error']}")
                return reply.get("result", {})
            self.events.append(reply)
        raise TimeoutError(method)

    def open(self, path: Path, width: int = 1000, height: int = 1400,
             timeout: float = 60) -> Page:
        target = self.send("Target.createTarget", {"url": "about:blank"})["targetId"]
        session = self.send("Target.attachToTarget", {"targetId": target,
                                                      "flatten": True})["sessionId"]
        page = Page(self, session, target)
        for domain in ("Runtime", "Log", "Network", "Page"):
            page.send(f"{domain}.enable")
        page.send("Emulation.setDeviceMetricsOverride", {
            "width": width, "height": height, "deviceScaleFactor": 1, "mobile": False})
        self.events.clear()
        page.url = path.resolve().as_uri()
        page.send("Page.navigate", {"url": page.url})
        page.wait_rendered(timeout)
        return page

    def close(self) -> None:
        try:
            self.send("Browser.close", timeout=10)
        except Exception:
            pass
        try:
            self.process.wait(timeout=10)
        except subprocess.TimeoutExpired:
            self.process.kill()
            self.process.wait()
        self.socket.close()
        shutil.rmtree(self.profile, ignore_errors=True)

    def __enter__(self) -> Browser:
        return self

    def __exit__(self, *exc) -> None:
        self.close()


class Page:
    def __init__(self, browser: Browser, session: str, target: str):
        self.browser, self.session, self.target = browser, session, target
        self.url = ""

    def send(self, method: str, params: dict | None = None, timeout: float = 60) -> dict:
        return self.browser.send(method, params, self.session, timeout)

    def evaluate(self, expression: str):
        result = self.send("Runtime.evaluate", {"expression": expression, "returnByValue": True,
                                                "awaitPromise": True})
        if "exceptionDetails" in result:
            raise RuntimeError(f"{expression[:60]}: {result['exceptionDetails']}")
        return result["result"].get("value")

    def wait_rendered(self, timeout: float) -> None:
        deadline = time.monotonic() + timeout
        while time.monotonic() < deadline:
            state = self.evaluate("document.readyState === 'complete' && "
                                  "document.body && document.body.dataset.rendered")
            if state:
                if state == "failed":
                    raise RuntimeError(f"the charts failed to render: {self.console_errors}")
                return
            time.sleep(0.05)
        raise TimeoutError(f"{self.url}: charts not rendered within {timeout}s")

    def _events(self, method: str) -> list[dict]:
        return [e["params"] for e in self.browser.events
                if e.get("sessionId") == self.session and e.get("method") == method]

    @property
    def console_errors(self) -> list[str]:
        """Console errors, uncaught exceptions and error log entries (CSP refusals too)."""
        found = [" ".join(str(a.get("value", a.get("description", ""))) for a in e["args"])
                 for e in self._events("Runtime.consoleAPICalled")
                 if e["type"] in ("error", "assert")]
        found += [e["exceptionDetails"].get("text", "") + " "
                  + str(e["exceptionDetails"].get("exception", {}).get("description", ""))
                  for e in self._events("Runtime.exceptionThrown")]
        found += [e["entry"]["text"] for e in self._events("Log.entryAdded")
                  if e["entry"]["level"] == "error"]
        return found

    @property
    def requests(self) -> list[str]:
        """Every URL the page asked for, the page itself included."""
        return [e["request"]["url"] for e in self._events("Network.requestWillBeSent")]

    def screenshot(self, path: Path, full_page: bool = False) -> bytes:
        params: dict = {"format": "png"}
        if full_page:
            size = self.send("Page.getLayoutMetrics")["cssContentSize"]
            params.update(captureBeyondViewport=True, clip={
                "x": 0, "y": 0, "width": size["width"], "height": size["height"], "scale": 1})
        data = base64.b64decode(self.send("Page.captureScreenshot", params)["data"])
        path.write_bytes(data)
        return data


def available() -> bool:
    return find_chromium() is not None and os.name == "posix"


if __name__ == "__main__":
    # python tests/browser.py PAGE.html OUT.png [WIDTH HEIGHT]: a screenshot of the top of a
    # page (how docs/report-screenshot.png is made from the demo's report).
    import sys

    page_path, out_path, *size = sys.argv[1:]
    width, height = (int(size[0]), int(size[1])) if size else (1000, 1500)
    with Browser.start() as browser:
        opened = browser.open(Path(page_path), width=width, height=height)
        if opened.console_errors:
            sys.exit(f"console errors: {opened.console_errors}")
        opened.screenshot(Path(out_path))
