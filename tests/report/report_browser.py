"""Open a page in headless Chromium over the DevTools pipe and record what it did.

Records every network request the page made (beyond file: and data: URLs), console errors,
log entries of level error (CSP violations, failed loads) and the result of a JavaScript
expression evaluated after the load event. Standard library only: the DevTools protocol is
spoken as NUL-separated JSON over file descriptors 3 and 4 (--remote-debugging-pipe).
"""

from __future__ import annotations

import json
import os
import select
import shutil
import subprocess
import tempfile
import time
from dataclasses import dataclass, field
from pathlib import Path

BROWSER_FLAGS = (
    "--headless", "--no-sandbox", "--disable-gpu", "--no-first-run", "--no-default-browser-check",
    "--disable-background-networking", "--disable-component-update", "--disable-sync", "--disable-default-apps",
    "--disable-extensions", "--remote-debugging-pipe", "--host-resolver-rules=MAP * ~NOTFOUND",
    "--window-size=1280,900",
)


def find_chromium() -> str | None:
    return shutil.which("chromium") or shutil.which("chromium-browser")


@dataclass
class PageVisit:
    requests: list[str] = field(default_factory=list)
    console_errors: list[str] = field(default_factory=list)
    log_errors: list[str] = field(default_factory=list)
    evaluated: object = None


class _Pipe:
    def __init__(self, process: subprocess.Popen, to_browser: int, from_browser: int) -> None:
        self.process, self.to_browser, self.from_browser = process, to_browser, from_browser
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

    def _read_message(self, deadline: float) -> dict:
        while b"\0" not in self.buffer:
            remaining = deadline - time.monotonic()
            if remaining <= 0:
                raise TimeoutError("no answer from the browser")
            ready, _, _ = select.select([self.from_browser], [], [], remaining)
            if ready:
                chunk = os.read(self.from_browser, 1 << 16)
                if not chunk:
                    raise RuntimeError("browser closed the pipe")
                self.buffer += chunk
        message, self.buffer = self.buffer.split(b"\0", 1)
        return json.loads(message)

    def call(self, method: str, params: dict | None = None, session: str | None = None, timeout: float = 30) -> dict:
        wanted = self.send(method, params, session)
        deadline = time.monotonic() + timeout
        while True:
            message = self._read_message(deadline)
            if message.get("id") == wanted:
                if "error" in message:
                    raise RuntimeError(f"{method}: {message['error']}")
                return message.get("result", {})
            self.events.append(message)

    def wait_for(self, method: str, session: str, timeout: float = 30) -> None:
        deadline = time.monotonic() + timeout
        if any(e.get("method") == method and e.get("sessionId") == session for e in self.events):
            return
        while True:
            message = self._read_message(deadline)
            self.events.append(message)
            if message.get("method") == method and message.get("sessionId") == session:
                return


def _summarise(events: list[dict], session: str, visit: PageVisit) -> None:
    for event in (e for e in events if e.get("sessionId") == session):
        method, params = event.get("method"), event.get("params", {})
        if method == "Network.requestWillBeSent":
            url = params["request"]["url"]
            if not url.startswith(("file:", "data:")):
                visit.requests.append(url)
        elif method == "Runtime.consoleAPICalled" and params.get("type") in ("error", "assert"):
            visit.console_errors.append(" ".join(str(a.get("value", a.get("description"))) for a in params["args"]))
        elif method == "Runtime.exceptionThrown":
            visit.console_errors.append(params["exceptionDetails"].get("text", "exception"))
        elif method == "Log.entryAdded" and params["entry"].get("level") == "error":
            visit.log_errors.append(params["entry"].get("text", ""))


def visit_pages(paths: list[Path], expression: str, settle_seconds: float = 0.5) -> list[PageVisit]:
    """Load each file in its own tab of one headless Chromium and return what each page did."""
    browser = find_chromium()
    read_cmd, write_cmd = os.pipe()
    read_out, write_out = os.pipe()

    def wire_pipe() -> None:
        high_in, high_out = os.dup(read_cmd), os.dup(write_out)
        os.dup2(high_in, 3)
        os.dup2(high_out, 4)

    with tempfile.TemporaryDirectory() as profile:
        process = subprocess.Popen([browser, *BROWSER_FLAGS, f"--user-data-dir={profile}", "about:blank"],
                                   preexec_fn=wire_pipe, close_fds=False, stdin=subprocess.DEVNULL,
                                   stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
        os.close(read_cmd)
        os.close(write_out)
        pipe = _Pipe(process, write_cmd, read_out)
        visits = []
        try:
            for path in paths:
                target = pipe.call("Target.createTarget", {"url": "about:blank"})["targetId"]
                session = pipe.call("Target.attachToTarget", {"targetId": target, "flatten": True})["sessionId"]
                for domain in ("Network", "Runtime", "Log", "Page"):
                    pipe.call(f"{domain}.enable", session=session)
                pipe.call("Page.navigate", {"url": Path(path).resolve().as_uri()}, session=session)
                pipe.wait_for("Page.loadEventFired", session)
                time.sleep(settle_seconds)
                result = pipe.call("Runtime.evaluate", {"expression": expression, "returnByValue": True},
                                   session=session)
                visit = PageVisit(evaluated=result.get("result", {}).get("value"))
                _summarise(pipe.events, session, visit)
                visits.append(visit)
            pipe.send("Browser.close")
        finally:
            try:
                process.wait(timeout=10)
            except subprocess.TimeoutExpired:
                process.kill()
                process.wait()
            os.close(write_cmd)
            os.close(read_out)
    return visits
