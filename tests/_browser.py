"""A headless Chromium driven over the Chrome DevTools protocol on a pipe: no driver
binary, no websocket library, nothing but the standard library and Debian's chromium.

``--remote-debugging-pipe`` makes Chromium read protocol commands from file descriptor 3
and write replies and events to descriptor 4, each a JSON message ended by a NUL byte
(the protocol's documentation, "remote-debugging-pipe"; from memory). The flags keep the
browser off the network: no background fetches, no component or sync updates, no QUIC, a
fresh profile directory.

>>> with Browser() as b:                                    # doctest: +SKIP
...     shot = b.open("file:///tmp/page.html", width=1200, height=900)
"""

from __future__ import annotations

import base64
import contextlib
import fcntl
import json
import os
import queue
import shutil
import subprocess
import tempfile
import threading
import time
from pathlib import Path
from typing import Any

__all__ = ["FLAGS", "Browser", "chromium_path"]

#: Flags every start uses (the profile directory is added per start).
FLAGS = (
    "--headless",
    "--no-sandbox",
    "--disable-gpu",
    "--disable-quic",
    "--no-first-run",
    "--disable-background-networking",
    "--disable-component-update",
    "--disable-sync",
    "--remote-debugging-pipe",
)
_NAMES = ("chromium", "chromium-browser", "google-chrome")
_TIMEOUT = 60.0


def _high(fd: int) -> int:
    """``fd`` moved to a descriptor number of 10 or more."""
    moved = fcntl.fcntl(fd, fcntl.F_DUPFD, 10)
    os.close(fd)
    return moved


def chromium_path() -> str | None:
    """The Chromium executable on PATH (Debian's ``chromium``), or None."""
    for name in _NAMES:
        found = shutil.which(name)
        if found:
            return found
    return None


class Browser:
    """One headless Chromium with one page; events are kept for :attr:`errors`."""

    def __init__(self, executable: str | None = None) -> None:
        exe = executable or chromium_path()
        if exe is None:
            raise FileNotFoundError("chromium is not installed")
        self.profile = tempfile.mkdtemp(prefix="massarc-chromium-")
        cmd_read, self._cmd = os.pipe()
        self._replies, reply_write = os.pipe()
        # at 10 or above, so that bash's redirections to 3 and 4 cannot overwrite one another
        # (bash, not sh: dash takes one-digit descriptors only)
        cmd_read, reply_write = (_high(fd) for fd in (cmd_read, reply_write))
        script = f'exec "$0" "$@" 3<&{cmd_read} 4>&{reply_write}'
        self.proc = subprocess.Popen(
            ["bash", "-c", script, exe, *FLAGS, f"--user-data-dir={self.profile}", "about:blank"],
            pass_fds=(cmd_read, reply_write),
            stdin=subprocess.DEVNULL,
            stdout=subprocess.DEVNULL,
            stderr=subprocess.DEVNULL,
        )
        os.close(cmd_read)
        os.close(reply_write)
        self._next = 0
        self._inbox: queue.Queue[dict[str, Any] | None] = queue.Queue()
        self.events: list[dict[str, Any]] = []
        threading.Thread(target=self._read, daemon=True).start()
        self.session = ""

    def _read(self) -> None:
        buffer = b""
        with os.fdopen(self._replies, "rb", buffering=0) as pipe:
            while chunk := pipe.read(1 << 16):
                buffer += chunk
                *messages, buffer = buffer.split(b"\0")
                for message in messages:
                    self._inbox.put(json.loads(message))
        self._inbox.put(None)

    def send(self, method: str, params: dict[str, Any] | None = None, session: bool = True) -> Any:
        """Send one command and wait for its reply; returns its ``result``."""
        self._next += 1
        message: dict[str, Any] = {"id": self._next, "method": method, "params": params or {}}
        if session and self.session:
            message["sessionId"] = self.session
        os.write(self._cmd, json.dumps(message).encode() + b"\0")
        deadline = time.monotonic() + _TIMEOUT
        while True:
            reply = self._take(deadline, method)
            if reply.get("id") == self._next:
                if "error" in reply:
                    raise RuntimeError(f"{method}: {reply['error']}")
                return reply.get("result", {})
            self.events.append(reply)

    def _take(self, deadline: float, waiting_for: str) -> dict[str, Any]:
        try:
            item = self._inbox.get(timeout=max(0.0, deadline - time.monotonic()))
        except queue.Empty:
            raise TimeoutError(f"chromium did not answer {waiting_for} in time") from None
        if item is None:
            raise RuntimeError(f"chromium closed the pipe while waiting for {waiting_for}")
        return item

    def wait_for(self, method: str) -> dict[str, Any]:
        """Wait for an event of this page (e.g. ``Page.loadEventFired``)."""
        for seen in self.events:
            if seen.get("method") == method:
                return seen
        deadline = time.monotonic() + _TIMEOUT
        while True:
            event = self._take(deadline, method)
            self.events.append(event)
            if event.get("method") == method:
                return event

    def __enter__(self) -> Browser:
        target = self.send("Target.createTarget", {"url": "about:blank"})["targetId"]
        attached = self.send("Target.attachToTarget", {"targetId": target, "flatten": True})
        self.session = attached["sessionId"]
        for domain in ("Page", "Runtime", "Log"):
            self.send(f"{domain}.enable")
        return self

    def __exit__(self, *exc: object) -> None:
        with contextlib.suppress(RuntimeError, TimeoutError, OSError):
            self.send("Browser.close", session=False)
        try:
            self.proc.wait(timeout=20)
        except subprocess.TimeoutExpired:
            self.proc.kill()
            self.proc.wait()
        os.close(self._cmd)
        shutil.rmtree(self.profile, ignore_errors=True)

    def open(self, url: str, *, width: int, height: int, media: str = "") -> None:
        """Load ``url`` in a viewport of ``width`` x ``height`` CSS pixels, as for ``media``
        (``print`` or ``screen``; empty: as the browser would, so that printing prints)."""
        metrics = {"width": width, "height": height, "deviceScaleFactor": 1, "mobile": False}
        self.send("Emulation.setDeviceMetricsOverride", metrics)
        self.send("Emulation.setEmulatedMedia", {"media": media})
        self.events = [e for e in self.events if e.get("method") != "Page.loadEventFired"]
        self.send("Page.navigate", {"url": url})
        self.wait_for("Page.loadEventFired")

    def evaluate(self, expression: str) -> Any:
        """The value of a JavaScript expression in the page."""
        reply = self.send("Runtime.evaluate", {"expression": expression, "returnByValue": True})
        if "exceptionDetails" in reply:
            raise RuntimeError(f"{expression}: {reply['exceptionDetails']}")
        return reply["result"].get("value")

    def screenshot(self, path: Path, *, full_page: bool = False) -> Path:
        """A PNG of the viewport (or of the whole page) written to ``path``."""
        params: dict[str, Any] = {"format": "png"}
        if full_page:
            params["captureBeyondViewport"] = True
            size = self.evaluate(
                "[document.documentElement.scrollWidth, document.documentElement.scrollHeight]"
            )
            params["clip"] = {"x": 0, "y": 0, "width": size[0], "height": size[1], "scale": 1}
        data = self.send("Page.captureScreenshot", params)["data"]
        path.write_bytes(base64.b64decode(data))
        return path

    @property
    def errors(self) -> list[str]:
        """Console errors, uncaught exceptions and error log entries seen so far."""
        found = []
        for event in self.events:
            method, params = event.get("method"), event.get("params", {})
            if method == "Runtime.consoleAPICalled" and params.get("type") == "error":
                found.append(" ".join(str(a.get("value")) for a in params.get("args", [])))
            elif method == "Runtime.exceptionThrown":
                found.append(str(params.get("exceptionDetails", {}).get("text")))
            elif method == "Log.entryAdded" and params.get("entry", {}).get("level") == "error":
                found.append(str(params["entry"].get("text")))
        return found
