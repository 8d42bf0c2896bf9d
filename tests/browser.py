"""A small driver for headless chromium over its DevTools protocol (for the report's tests).

Chromium started with ``--remote-debugging-pipe`` reads protocol commands from file
descriptor 3 and writes replies and events to descriptor 4, each message JSON ended by a
NUL byte: no port, no network, no extra package.
"""

from __future__ import annotations

import base64
import contextlib
import fcntl
import json
import os
import shutil
import subprocess
import tempfile
import time
from typing import Any

FLAGS = (
    "--headless",
    "--no-sandbox",  # CI runs as root
    "--disable-gpu",
    "--disable-quic",
    "--no-first-run",
    "--disable-background-networking",
    "--disable-component-update",
    "--disable-sync",
)


def find_chromium() -> str | None:
    return shutil.which("chromium") or shutil.which("chromium-browser")


class Browser:
    """One headless chromium with one page; use as a context manager."""

    def __init__(self, width: int = 1400, height: int = 1000) -> None:
        binary = find_chromium()
        if binary is None:
            raise RuntimeError("chromium is not installed")
        # chromium's helper processes may still be writing as it exits
        self._profile = tempfile.TemporaryDirectory(ignore_cleanup_errors=True)
        commands_read, self._commands = os.pipe()
        self._replies, replies_write = os.pipe()

        def wire() -> None:  # in the child: the protocol's two descriptors
            # copied above 9 first, so that neither end is overwritten if it was 3 or 4
            high_read = fcntl.fcntl(commands_read, fcntl.F_DUPFD, 10)
            high_write = fcntl.fcntl(replies_write, fcntl.F_DUPFD, 10)
            os.dup2(high_read, 3)
            os.dup2(high_write, 4)

        self._process = subprocess.Popen(
            [
                binary,
                *FLAGS,
                f"--user-data-dir={self._profile.name}",
                f"--window-size={width},{height}",
                "--remote-debugging-pipe",
                "about:blank",
            ],
            pass_fds=(3, 4),
            preexec_fn=wire,
            stdout=subprocess.DEVNULL,
            stderr=subprocess.DEVNULL,
        )
        os.close(commands_read)
        os.close(replies_write)
        self._pending = b""
        self._next_id = 0
        target = self._call("Target.createTarget", {"url": "about:blank"})["targetId"]
        self._session = self._call("Target.attachToTarget", {"targetId": target, "flatten": True})[
            "sessionId"
        ]
        self.call(
            "Emulation.setDeviceMetricsOverride",
            {"width": width, "height": height, "deviceScaleFactor": 1, "mobile": False},
        )

    def __enter__(self) -> Browser:
        return self

    def __exit__(self, *exc: object) -> None:
        with contextlib.suppress(RuntimeError, OSError):  # it may close before it replies
            self._call("Browser.close", {})
        try:
            self._process.wait(timeout=20)
        except subprocess.TimeoutExpired:
            self._process.kill()
            self._process.wait()
        os.close(self._commands)
        os.close(self._replies)
        self._profile.cleanup()

    def _call(self, method: str, params: dict, session: str | None = None) -> dict:
        self._next_id += 1
        message: dict[str, Any] = {"id": self._next_id, "method": method, "params": params}
        if session:
            message["sessionId"] = session
        os.write(self._commands, json.dumps(message).encode() + b"\0")
        while True:
            while b"\0" not in self._pending:
                chunk = os.read(self._replies, 1 << 16)
                if not chunk:
                    raise RuntimeError("chromium closed the protocol pipe")
                self._pending += chunk
            raw, self._pending = self._pending.split(b"\0", 1)
            reply = json.loads(raw)
            if reply.get("id") == self._next_id:  # events (no id) are not needed here
                if "error" in reply:
                    raise RuntimeError(f"{method}: {reply['error']}")
                return reply["result"]

    def call(self, method: str, params: dict | None = None) -> dict:
        return self._call(method, params or {}, self._session)

    def evaluate(self, expression: str) -> Any:
        result = self.call("Runtime.evaluate", {"expression": expression, "returnByValue": True})
        if "exceptionDetails" in result:
            raise RuntimeError(f"{expression}: {result['exceptionDetails']}")
        return result["result"].get("value")

    def wait_for(self, expression: str, seconds: float = 20.0) -> Any:
        deadline = time.monotonic() + seconds
        while time.monotonic() < deadline:
            value = self.evaluate(expression)
            if value:
                return value
            time.sleep(0.05)
        raise TimeoutError(f"still false after {seconds} s: {expression}")

    def open(self, url: str) -> None:
        self.call("Page.navigate", {"url": url})
        self.wait_for("document.readyState === 'complete'")

    def click(self, selector: str) -> None:
        """A real mouse click in the middle of the element."""
        box = self.evaluate(
            f"(() => {{ const r = document.querySelector({json.dumps(selector)})"
            ".getBoundingClientRect(); return [r.x + r.width / 2, r.y + r.height / 2]; })()"
        )
        for kind in ("mousePressed", "mouseReleased"):
            self.call(
                "Input.dispatchMouseEvent",
                {"type": kind, "x": box[0], "y": box[1], "button": "left", "clickCount": 1},
            )

    def type(self, text: str) -> None:
        """Typed into the focused element, one key at a time."""
        for character in text:
            self.call("Input.dispatchKeyEvent", {"type": "keyDown", "text": character})
            self.call("Input.dispatchKeyEvent", {"type": "keyUp"})

    def press_enter(self) -> None:
        enter = {"key": "Enter", "code": "Enter", "windowsVirtualKeyCode": 13}
        self.call("Input.dispatchKeyEvent", {"type": "keyDown", "text": "\r", **enter})
        self.call("Input.dispatchKeyEvent", {"type": "keyUp", **enter})

    def screenshot(self) -> bytes:
        return base64.b64decode(self.call("Page.captureScreenshot", {"format": "png"})["data"])
