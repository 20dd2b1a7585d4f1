"""A real headless browser for the page tests: Debian's chromium over its DevTools pipe.

    with Browser.start() as browser:                  # None when chromium is not installed
        page = browser.open(path, width=390, height=844, mobile=True)
        page.evaluate("document.title")
        png = page.screenshot()                       # bytes of a PNG of the viewport
    pixels = decode_png(png)                          # (height, width, 3) array of RGB

The DevTools protocol runs over ``--remote-debugging-pipe`` (JSON messages ending in NUL on the
child's fds 3 and 4), so the standard library is enough: no websocket client, no driver.
"""

from __future__ import annotations

import base64
import contextlib
import fcntl
import json
import os
import shutil
import struct
import subprocess
import tempfile
import time
import zlib
from pathlib import Path

import numpy as np

CHROMIUM_NAMES = ("chromium", "chromium-browser", "google-chrome", "chrome")
TIMEOUT_S = 60.0


def find_chromium() -> str | None:
    """The chromium executable on PATH (``$ADVISOR_CHROMIUM`` first), or None."""
    named = os.environ.get("ADVISOR_CHROMIUM")
    if named:
        return shutil.which(named) or (named if Path(named).exists() else None)
    return next((p for p in map(shutil.which, CHROMIUM_NAMES) if p), None)


class Browser:
    """One chromium process driven over its DevTools pipe."""

    def __init__(self, executable: str):
        self.profile = tempfile.mkdtemp(prefix="advisor-chromium-")
        to_child_r, self._to_child = os.pipe()
        self._from_child, from_child_w = os.pipe()
        # move the child's ends above the standard fds before placing them on 3 and 4
        high_r = fcntl.fcntl(to_child_r, fcntl.F_DUPFD, 10)
        high_w = fcntl.fcntl(from_child_w, fcntl.F_DUPFD, 10)
        os.close(to_child_r)
        os.close(from_child_w)

        def place_fds():
            os.dup2(high_r, 3)
            os.dup2(high_w, 4)

        args = [
            executable,
            "--headless",
            "--no-sandbox",
            "--disable-gpu",
            "--hide-scrollbars",
            "--no-first-run",
            "--no-default-browser-check",
            "--disable-extensions",
            "--mute-audio",
            f"--user-data-dir={self.profile}",
            "--remote-debugging-pipe",
            "about:blank",
        ]
        # close_fds=False: the fds placed on 3 and 4 must survive into chromium; every other fd of
        # this process is non-inheritable (PEP 446), so nothing else leaks
        self.proc = subprocess.Popen(
            args,
            stdin=subprocess.DEVNULL,
            stdout=subprocess.DEVNULL,
            stderr=subprocess.DEVNULL,
            preexec_fn=place_fds,
            close_fds=False,
        )
        os.close(high_r)
        os.close(high_w)
        self._buffer = b""
        self._next_id = 0
        self.events: list[dict] = []

    @classmethod
    def start(cls) -> Browser | None:
        executable = find_chromium()
        return cls(executable) if executable else None

    def __enter__(self) -> Browser:
        return self

    def __exit__(self, *exc) -> None:
        self.close()

    def close(self) -> None:
        with contextlib.suppress(Exception):  # the browser may already be gone
            self.send("Browser.close")
        try:
            self.proc.wait(timeout=10)
        except subprocess.TimeoutExpired:
            self.proc.kill()
            self.proc.wait()
        for fd in (self._to_child, self._from_child):
            with contextlib.suppress(OSError):
                os.close(fd)
        shutil.rmtree(self.profile, ignore_errors=True)

    # --- protocol ---------------------------------------------------------------------------
    def _read_message(self, deadline: float) -> dict:
        while b"\0" not in self._buffer:
            if time.monotonic() > deadline:
                raise TimeoutError("chromium did not answer in time")
            chunk = os.read(self._from_child, 1 << 16)
            if not chunk:
                raise RuntimeError("chromium closed its DevTools pipe")
            self._buffer += chunk
        message, self._buffer = self._buffer.split(b"\0", 1)
        return json.loads(message)

    def send(self, method: str, params: dict | None = None, session: str | None = None) -> dict:
        """Send one command and wait for its answer (events meanwhile are kept in ``events``)."""
        self._next_id += 1
        msg = {"id": self._next_id, "method": method, "params": params or {}}
        if session:
            msg["sessionId"] = session
        os.write(self._to_child, json.dumps(msg).encode() + b"\0")
        deadline = time.monotonic() + TIMEOUT_S
        while True:
            answer = self._read_message(deadline)
            if answer.get("id") == self._next_id:
                if "error" in answer:
                    raise RuntimeError(f"{method}: {answer['error']}")
                return answer.get("result", {})
            self.events.append(answer)

    def wait_event(self, method: str, session: str) -> dict:
        deadline = time.monotonic() + TIMEOUT_S
        while True:
            for k, ev in enumerate(self.events):
                if ev.get("method") == method and ev.get("sessionId") == session:
                    return self.events.pop(k)
            self.events.append(self._read_message(deadline))

    def open(self, path: Path, width: int, height: int, mobile: bool = False) -> Page:
        """A new tab showing ``path`` in a ``width`` × ``height`` CSS-pixel viewport, loaded."""
        target = self.send("Target.createTarget", {"url": "about:blank"})["targetId"]
        session = self.send("Target.attachToTarget", {"targetId": target, "flatten": True})["sessionId"]
        self.send(
            "Emulation.setDeviceMetricsOverride",
            {"width": width, "height": height, "deviceScaleFactor": 1, "mobile": mobile},
            session,
        )
        self.send("Page.enable", {}, session)
        self.send("Page.navigate", {"url": Path(path).resolve().as_uri()}, session)
        self.wait_event("Page.loadEventFired", session)
        return Page(self, session, width, height)


class Page:
    """One loaded tab."""

    def __init__(self, browser: Browser, session: str, width: int, height: int):
        self.browser, self.session, self.width, self.height = browser, session, width, height

    def evaluate(self, expression: str):
        """The JSON value of a JavaScript expression in the page."""
        result = self.browser.send(
            "Runtime.evaluate", {"expression": expression, "returnByValue": True, "awaitPromise": True}, self.session
        )
        if "exceptionDetails" in result:
            raise RuntimeError(f"page script failed: {result['exceptionDetails']}")
        return result["result"].get("value")

    def screenshot(self) -> bytes:
        """A PNG of the viewport."""
        data = self.browser.send("Page.captureScreenshot", {"format": "png"}, self.session)["data"]
        return base64.b64decode(data)


def decode_png(data: bytes) -> np.ndarray:
    """The pixels of an 8-bit, non-interlaced RGB or RGBA PNG as a (height, width, 3) uint8 array.

    Rows filtered "none", "sub" and "up" (nearly all of a screenshot) are undone with numpy;
    "average" and "Paeth" rows byte by byte (PNG specification, ISO/IEC 15948:2004, section 9).
    """
    assert data[:8] == b"\x89PNG\r\n\x1a\n", "not a PNG"
    pos, idat, header = 8, b"", None
    while pos < len(data):
        length, kind = struct.unpack(">I4s", data[pos : pos + 8])
        body = data[pos + 8 : pos + 8 + length]
        if kind == b"IHDR":
            header = struct.unpack(">IIBBBBB", body)
        elif kind == b"IDAT":
            idat += body
        pos += 12 + length
    width, height, depth, color, _, _, interlace = header
    assert depth == 8 and color in (2, 6) and interlace == 0, header
    bpp = 3 if color == 2 else 4
    stride = width * bpp
    raw = np.frombuffer(zlib.decompress(idat), dtype=np.uint8).reshape(height, stride + 1)
    out = np.zeros((height, stride), dtype=np.uint8)
    prev = np.zeros(stride, dtype=np.uint8)
    for y in range(height):
        kind, line = raw[y, 0], raw[y, 1:]
        if kind == 0:
            row = line.copy()
        elif kind == 1:
            row = (np.cumsum(line.reshape(width, bpp).astype(np.int64), axis=0) % 256).astype(np.uint8).ravel()
        elif kind == 2:
            row = line + prev
        else:
            row = bytearray(line.tobytes())
            up = prev.tobytes()
            for x in range(stride):
                a = row[x - bpp] if x >= bpp else 0
                b = up[x]
                if kind == 3:
                    row[x] = (row[x] + (a + b) // 2) & 255
                else:
                    c = up[x - bpp] if x >= bpp else 0
                    p = a + b - c
                    pa, pb, pc = abs(p - a), abs(p - b), abs(p - c)
                    row[x] = (row[x] + (a if pa <= pb and pa <= pc else b if pb <= pc else c)) & 255
            row = np.frombuffer(bytes(row), dtype=np.uint8)
        out[y] = row
        prev = out[y]
    return out.reshape(height, width, bpp)[:, :, :3]
