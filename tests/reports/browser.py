"""Headless Chromium driven over the DevTools protocol through a pipe (standard library only).

Debian's ``chromium`` is started with ``--remote-debugging-pipe``: it reads
protocol commands from file descriptor 3 and writes answers and events to
descriptor 4, each message a JSON text ended by a NUL byte. A shell wrapper
puts our pipes on those descriptors, so no WebSocket client and no browser
download are needed. A missing browser fails the test with the fix (it never
skips): ``apt-get install -y chromium``.

:func:`png_pixels` decodes the screenshots (zlib and numpy), so the tests can
tell a blank page from a drawn one without an imaging library.
"""

from __future__ import annotations

import base64
import json
import os
import re
import shutil
import struct
import subprocess
import threading
import zlib
from collections.abc import Iterator
from contextlib import contextmanager, suppress
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np
import pytest

FLAGS = (
    "--headless",
    "--no-sandbox",
    "--disable-gpu",
    "--no-first-run",
    "--disable-background-networking",
    "--disable-component-update",
    "--disable-sync",
    "--disable-default-apps",
    "--disable-extensions",
    "--hide-scrollbars",
    "--mute-audio",
)
TIMEOUT_S = 60.0


def find_chromium() -> str:
    """The path of Debian's chromium, or fail the test with how to install it."""
    for candidate in ("/usr/bin/chromium", shutil.which("chromium")):
        if candidate and os.access(candidate, os.X_OK):
            return candidate
    pytest.fail(
        "chromium is not installed; the report tests open the HTML page in Debian's headless "
        "chromium: run `apt-get install -y chromium` (as root; `apt-get update` first if needed)",
        pytrace=False,
    )


class ProtocolError(RuntimeError):
    """The browser answered a command with an error, or did not answer in time."""


@dataclass
class Browser:
    """One running chromium and its protocol pipe."""

    process: subprocess.Popen[bytes]
    log_path: Path
    _next_id: int = 0
    _answers: dict[int, dict[str, Any]] = field(default_factory=dict)
    events: list[dict[str, Any]] = field(default_factory=list)
    _changed: threading.Condition = field(default_factory=threading.Condition)
    _closed: bool = False

    def _read(self) -> None:
        assert self.process.stdout is not None
        buffer = b""
        while True:
            chunk = self.process.stdout.read1(1 << 16)
            if not chunk:
                break
            buffer += chunk
            *messages, buffer = buffer.split(b"\0")
            with self._changed:
                for raw in messages:
                    message = json.loads(raw)
                    if "id" in message:
                        self._answers[message["id"]] = message
                    else:
                        self.events.append(message)
                self._changed.notify_all()
        with self._changed:
            self._closed = True
            self._changed.notify_all()

    def send(
        self, method: str, params: dict[str, Any] | None = None, session: str | None = None
    ) -> dict[str, Any]:
        """Send one command and wait for its answer; return its result."""
        assert self.process.stdin is not None
        with self._changed:
            self._next_id += 1
            number = self._next_id
        message: dict[str, Any] = {"id": number, "method": method, "params": params or {}}
        if session is not None:
            message["sessionId"] = session
        self.process.stdin.write(json.dumps(message).encode() + b"\0")
        self.process.stdin.flush()
        with self._changed:
            if not self._changed.wait_for(
                lambda: number in self._answers or self._closed, timeout=TIMEOUT_S
            ):
                raise ProtocolError(f"{method}: no answer within {TIMEOUT_S:g} s")
            if number not in self._answers:
                raise ProtocolError(f"{method}: the browser closed the pipe; see {self.log_path}")
            answer = self._answers.pop(number)
        if "error" in answer:
            raise ProtocolError(f"{method}: {answer['error']}")
        result: dict[str, Any] = answer.get("result", {})
        return result

    def wait_event(self, method: str, session: str | None = None) -> dict[str, Any]:
        """Wait for the first event ``method`` (of ``session``) not yet taken."""

        def find() -> dict[str, Any] | None:
            for event in self.events:
                if event.get("method") == method and event.get("sessionId") == session:
                    event["_taken"] = True
                    return event
            return None

        with self._changed:
            found: list[dict[str, Any]] = []
            ok = self._changed.wait_for(
                lambda: (
                    bool(found.append(e) or True) if (e := find()) is not None else self._closed
                ),
                timeout=TIMEOUT_S,
            )
            if not ok or not found:
                raise ProtocolError(f"no {method} event within {TIMEOUT_S:g} s")
            return found[0]


@contextmanager
def chromium(tmp_path: Path) -> Iterator[Browser]:
    """Start headless chromium with its own profile folder; close it on exit."""
    binary = find_chromium()
    profile = tmp_path / "chromium-profile"
    profile.mkdir()
    log_path = tmp_path / "chromium.log"
    # Descriptor 3 is what chromium reads commands from, 4 where it writes answers.
    command = [
        "/bin/sh",
        "-c",
        'exec "$@" 3<&0 4>&1 0</dev/null 1>&2',
        "sh",
        binary,
        *FLAGS,
        f"--user-data-dir={profile}",
        "--remote-debugging-pipe",
        "about:blank",
    ]
    with log_path.open("wb") as log:
        process = subprocess.Popen(
            command, stdin=subprocess.PIPE, stdout=subprocess.PIPE, stderr=log
        )
    browser = Browser(process, log_path)
    reader = threading.Thread(target=browser._read, daemon=True)
    reader.start()
    try:
        yield browser
    finally:
        with suppress(ProtocolError, OSError):
            browser.send("Browser.close")
        try:
            process.wait(10)
        except subprocess.TimeoutExpired:
            process.kill()
            process.wait(10)
        reader.join(5)
        for pipe in (process.stdin, process.stdout):
            if pipe is not None:
                with suppress(OSError):
                    pipe.close()


@dataclass
class Page:
    """A tab attached over a flat session."""

    browser: Browser
    session: str

    def send(self, method: str, params: dict[str, Any] | None = None) -> dict[str, Any]:
        return self.browser.send(method, params, self.session)

    def evaluate(self, expression: str) -> Any:
        answer = self.send("Runtime.evaluate", {"expression": expression, "returnByValue": True})
        if "exceptionDetails" in answer:
            raise ProtocolError(f"{expression!r} failed: {answer['exceptionDetails']}")
        return answer["result"].get("value")

    def screenshot(self, clip: dict[str, float] | None = None) -> bytes:
        # optimizeForSpeed: chromium then filters every PNG row with "Up", which
        # png_pixels decodes in one numpy step per row
        params: dict[str, Any] = {
            "format": "png",
            "captureBeyondViewport": True,
            "optimizeForSpeed": True,
        }
        if clip is not None:
            params["clip"] = clip
        return base64.b64decode(self.send("Page.captureScreenshot", params)["data"])

    def problems(self) -> list[str]:
        """Console errors, uncaught exceptions and failed loads of this page so far."""
        found = []
        for event in self.browser.events:
            if event.get("sessionId") != self.session:
                continue
            method, params = event.get("method"), event.get("params", {})
            if method == "Runtime.exceptionThrown":
                found.append(f"exception: {params['exceptionDetails']}")
            elif method == "Runtime.consoleAPICalled" and params.get("type") in ("error", "assert"):
                found.append(f"console.{params['type']}: {params.get('args')}")
            elif method == "Log.entryAdded" and params["entry"].get("level") == "error":
                found.append(f"log: {params['entry'].get('text')} {params['entry'].get('url', '')}")
            elif method == "Network.loadingFailed":
                found.append(f"load failed: {params.get('errorText')}")
        return found

    def requests(self) -> list[str]:
        """URLs of every request the page made."""
        return [
            event["params"]["request"]["url"]
            for event in self.browser.events
            if event.get("sessionId") == self.session
            and event.get("method") == "Network.requestWillBeSent"
        ]


def open_page(browser: Browser, path: Path, width: int = 1100, height: int = 900) -> Page:
    """Open ``path`` in a new tab, listening to the console and the network; wait for load."""
    target = browser.send("Target.createTarget", {"url": "about:blank"})["targetId"]
    session = browser.send("Target.attachToTarget", {"targetId": target, "flatten": True})[
        "sessionId"
    ]
    page = Page(browser, session)
    for domain in ("Page", "Runtime", "Log", "Network"):
        page.send(f"{domain}.enable")
    page.send(
        "Emulation.setDeviceMetricsOverride",
        {"width": width, "height": height, "deviceScaleFactor": 1, "mobile": False},
    )
    page.send("Page.navigate", {"url": path.resolve().as_uri()})
    browser.wait_event("Page.loadEventFired", session)
    return page


def pdf_pages(data: bytes) -> int:
    """The number of pages of a PDF: the largest /Count of its page tree."""
    if not data.startswith(b"%PDF-"):
        raise ValueError("not a PDF file")
    return max(int(n) for n in re.findall(rb"/Count (\d+)", data))


def png_pixels(data: bytes) -> np.ndarray:
    """Decode an 8-bit RGB or RGBA, non-interlaced PNG into an (height, width, channels) array."""
    if data[:8] != b"\x89PNG\r\n\x1a\n":
        raise ValueError("not a PNG file")
    position = 8
    idat = b""
    width = height = channels = 0
    while position < len(data):
        (length,) = struct.unpack(">I", data[position : position + 4])
        kind = data[position + 4 : position + 8]
        body = data[position + 8 : position + 8 + length]
        if kind == b"IHDR":
            width, height, depth, colour, _, _, interlace = struct.unpack(">IIBBBBB", body)
            if depth != 8 or colour not in (2, 6) or interlace:
                raise ValueError(f"unsupported PNG: depth {depth}, colour type {colour}")
            channels = 3 if colour == 2 else 4
        elif kind == b"IDAT":
            idat += body
        position += 12 + length
    raw = np.frombuffer(zlib.decompress(idat), dtype=np.uint8)
    stride = width * channels
    rows = raw.reshape(height, stride + 1)
    out = np.zeros((height, stride), dtype=np.int32)
    previous = np.zeros(stride, dtype=np.int32)
    for y in range(height):
        kind = int(rows[y, 0])
        line = rows[y, 1:].astype(np.int32)
        if kind == 0:
            current = line
        elif kind == 1:
            current = _sub(line, channels)
        elif kind == 2:
            current = (line + previous) & 0xFF
        else:
            current = _sequential(line, previous, channels, kind)
        out[y] = current
        previous = current
    return out.reshape(height, width, channels).astype(np.uint8)


def _sub(line: np.ndarray, channels: int) -> np.ndarray:
    pixels = line.reshape(-1, channels)
    return (np.cumsum(pixels, axis=0) & 0xFF).reshape(-1)


def _sequential(line: np.ndarray, previous: np.ndarray, channels: int, kind: int) -> np.ndarray:
    current = np.zeros_like(line)
    up = previous.tolist()
    values = line.tolist()
    result = [0] * len(values)
    for i, value in enumerate(values):
        left = result[i - channels] if i >= channels else 0
        above = up[i]
        upper_left = up[i - channels] if i >= channels else 0
        if kind == 3:
            predictor = (left + above) // 2
        elif kind == 4:
            p = left + above - upper_left
            pa, pb, pc = abs(p - left), abs(p - above), abs(p - upper_left)
            predictor = left if pa <= pb and pa <= pc else above if pb <= pc else upper_left
        else:
            raise ValueError(f"unknown PNG filter {kind}")
        result[i] = (value + predictor) & 0xFF
    current[:] = result
    return current
