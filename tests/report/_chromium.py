"""Drive Debian's headless Chromium over the DevTools protocol on a pipe (stdlib only).

``--remote-debugging-pipe`` makes Chromium read JSON commands on fd 3 and write replies and
events on fd 4, each message ended by a NUL byte (Chrome DevTools Protocol, "pipe" transport).
That lets a test see console messages, uncaught exceptions and image decode results without
any network port or third-party client.
"""
from __future__ import annotations

import base64
import json
import os
import select
import shutil
import subprocess
import time
from dataclasses import dataclass, field
from pathlib import Path

__all__ = ["PageReport", "inspect_page"]

FLAGS = ["--headless", "--no-sandbox", "--disable-gpu", "--disable-background-networking",
         "--disable-component-update", "--disable-sync", "--no-first-run",
         "--remote-debugging-pipe", "--window-size=1200,2000"]

# Collected in the page after load: every image's decode state and the visible text.
PROBE = """JSON.stringify({
  images: Array.from(document.images).map(i => ({complete: i.complete, width: i.naturalWidth})),
  text: document.body.innerText,
  scripts: document.scripts.length,
  hostile: typeof window.__hostile_ran !== 'undefined'
})"""


@dataclass
class PageReport:
    """What the browser saw: console errors, exceptions, images, text and a screenshot."""

    console_errors: list[str] = field(default_factory=list)
    exceptions: list[str] = field(default_factory=list)
    images: list[dict] = field(default_factory=list)
    text: str = ""
    scripts: int = 0
    hostile_ran: bool = False
    screenshot: Path | None = None


class _Pipe:
    def __init__(self, proc: subprocess.Popen, write_fd: int, read_fd: int):
        self.proc, self.write_fd, self.read_fd = proc, write_fd, read_fd
        self.buffer = b""
        self.next_id = 0
        self.events: list[dict] = []

    def send(self, method: str, params: dict | None = None, session: str | None = None,
             timeout: float = 60.0) -> dict:
        self.next_id += 1
        msg = {"id": self.next_id, "method": method, "params": params or {}}
        if session:
            msg["sessionId"] = session
        os.write(self.write_fd, json.dumps(msg).encode() + b"\0")
        while True:
            reply = self._read(timeout)
            if reply.get("id") == self.next_id:
                if "error" in reply:
                    raise RuntimeError(f"{method}: {reply['error']}")
                return reply.get("result", {})
            self.events.append(reply)

    def wait_event(self, method: str, timeout: float = 60.0) -> dict:
        for i, event in enumerate(self.events):
            if event.get("method") == method:
                return self.events.pop(i)
        while True:
            event = self._read(timeout)
            if event.get("method") == method:
                return event
            self.events.append(event)

    def _read(self, timeout: float) -> dict:
        deadline = time.monotonic() + timeout
        while b"\0" not in self.buffer:
            left = deadline - time.monotonic()
            ready, _, _ = select.select([self.read_fd], [], [], max(left, 0))
            if not ready:
                raise TimeoutError("no reply from Chromium")
            chunk = os.read(self.read_fd, 1 << 20)
            if not chunk:
                raise RuntimeError("Chromium closed the DevTools pipe")
            self.buffer += chunk
        raw, self.buffer = self.buffer.split(b"\0", 1)
        return json.loads(raw)


def inspect_page(html: Path, workdir: Path) -> PageReport:
    """Load ``html`` in headless Chromium; return what it logged, decoded and showed.

    Args:
        html: the page to open (a local file).
        workdir: scratch folder for the browser profile and the screenshot.
    """
    binary = shutil.which("chromium")
    assert binary, "Debian's chromium package is required (apt-get install chromium)"
    to_browser_r, to_browser_w = os.pipe()
    from_browser_r, from_browser_w = os.pipe()
    profile = workdir / "chromium-profile"
    profile.mkdir(parents=True, exist_ok=True)

    def child_fds():  # fd 3 = commands in, fd 4 = replies out (pipe transport)
        # Through high numbers first, so neither pipe end is overwritten on its way to 3/4.
        os.dup2(to_browser_r, 200)
        os.dup2(from_browser_w, 201)
        os.dup2(200, 3)
        os.dup2(201, 4)

    proc = subprocess.Popen([binary, *FLAGS, f"--user-data-dir={profile}", "about:blank"],
                            stdin=subprocess.DEVNULL, stdout=subprocess.DEVNULL,
                            stderr=subprocess.DEVNULL, preexec_fn=child_fds,
                            pass_fds=(3, 4))
    os.close(to_browser_r)
    os.close(from_browser_w)
    pipe = _Pipe(proc, to_browser_w, from_browser_r)
    report = PageReport()
    try:
        target = pipe.send("Target.createTarget", {"url": "about:blank"})["targetId"]
        session = pipe.send("Target.attachToTarget",
                            {"targetId": target, "flatten": True})["sessionId"]
        for domain in ("Page", "Runtime", "Log"):
            pipe.send(f"{domain}.enable", session=session)
        pipe.send("Page.navigate", {"url": html.resolve().as_uri()}, session=session)
        pipe.wait_event("Page.loadEventFired")
        result = pipe.send("Runtime.evaluate", {"expression": PROBE, "returnByValue": True},
                           session=session)
        probe = json.loads(result["result"]["value"])
        shot = pipe.send("Page.captureScreenshot", {"format": "png"}, session=session)
        report.screenshot = workdir / "dossier.png"
        report.screenshot.write_bytes(base64.b64decode(shot["data"]))
        pipe.send("Browser.close")
    finally:
        _stop(proc)
        os.close(to_browser_w)
        os.close(from_browser_r)
    for event in pipe.events:
        params = event.get("params", {})
        if event.get("method") == "Runtime.consoleAPICalled" and params.get("type") == "error":
            report.console_errors.append(json.dumps(params.get("args")))
        elif event.get("method") == "Log.entryAdded" and params["entry"]["level"] == "error":
            report.console_errors.append(params["entry"].get("text", ""))
        elif event.get("method") == "Runtime.exceptionThrown":
            report.exceptions.append(json.dumps(params.get("exceptionDetails")))
    report.images = probe["images"]
    report.text = probe["text"]
    report.scripts = probe["scripts"]
    report.hostile_ran = probe["hostile"]
    return report


def _stop(proc: subprocess.Popen) -> None:
    """Let Chromium exit after Browser.close; kill it only if it hangs (or a step failed)."""
    try:
        proc.wait(timeout=20)
    except subprocess.TimeoutExpired:
        proc.kill()
        proc.wait(timeout=20)
