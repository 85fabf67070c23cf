"""Drive headless Chromium through the DevTools protocol with the standard library only.

A minimal WebSocket client (RFC 6455: client frames masked, text frames,
continuation, ping/pong, close) over a socket to 127.0.0.1, and a small
session that sends commands and collects the events of interest. Chromium
picks a free port (``--remote-debugging-port=0``) and writes it to
``DevToolsActivePort`` in the profile directory, so no port is guessed.
"""
from __future__ import annotations

import base64
import json
import os
import shutil
import socket
import struct
import subprocess
import time
import urllib.request
from pathlib import Path
from typing import Any

FLAGS = ("--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
         "--disable-background-networking", "--disable-component-update", "--disable-sync",
         "--disable-default-apps", "--disable-extensions", "--mute-audio", "--hide-scrollbars")
CANDIDATES = ("/usr/bin/chromium", "chromium", "chromium-browser")


def find_chromium() -> str | None:
    """Path of a Chromium executable, or None."""
    env = os.environ.get("HEADPREP_CHROMIUM")
    for name in ((env,) if env else ()) + CANDIDATES:
        path = shutil.which(name) if name else None
        if path:
            return path
    return None


class WebSocket:
    """Just enough of a WebSocket client for the DevTools protocol."""

    def __init__(self, url: str, timeout: float = 120.0) -> None:
        assert url.startswith("ws://127.0.0.1:"), url
        hostport, _, path = url[len("ws://"):].partition("/")
        host, port = hostport.split(":")
        self.sock = socket.create_connection((host, int(port)), timeout=timeout)
        key = base64.b64encode(os.urandom(16)).decode()
        self.sock.sendall((f"GET /{path} HTTP/1.1\r\nHost: {hostport}\r\nUpgrade: websocket\r\n"
                           f"Connection: Upgrade\r\nSec-WebSocket-Key: {key}\r\n"
                           f"Sec-WebSocket-Version: 13\r\n\r\n").encode())
        head = b""
        while b"\r\n\r\n" not in head:
            chunk = self.sock.recv(4096)
            if not chunk:
                raise ConnectionError("DevTools closed the connection during the handshake")
            head += chunk
        status, _, self._buf = head.partition(b"\r\n\r\n")
        if b" 101 " not in status.split(b"\r\n")[0]:
            raise ConnectionError(f"WebSocket handshake refused: {status[:200]!r}")

    def _exact(self, n: int) -> bytes:
        while len(self._buf) < n:
            chunk = self.sock.recv(max(65536, n - len(self._buf)))
            if not chunk:
                raise ConnectionError("DevTools closed the connection")
            self._buf += chunk
        out, self._buf = self._buf[:n], self._buf[n:]
        return out

    def _frame(self, opcode: int, payload: bytes) -> None:
        mask = os.urandom(4)
        n = len(payload)
        head = bytes([0x80 | opcode])
        if n < 126:
            head += bytes([0x80 | n])
        elif n < 1 << 16:
            head += bytes([0x80 | 126]) + struct.pack("!H", n)
        else:
            head += bytes([0x80 | 127]) + struct.pack("!Q", n)
        body = bytes(b ^ mask[i % 4] for i, b in enumerate(payload))
        self.sock.sendall(head + mask + body)

    def send(self, text: str) -> None:
        self._frame(0x1, text.encode())

    def recv(self) -> str:
        parts: list[bytes] = []
        while True:
            b0, b1 = self._exact(2)
            opcode, n = b0 & 0x0F, b1 & 0x7F
            if n == 126:
                n = struct.unpack("!H", self._exact(2))[0]
            elif n == 127:
                n = struct.unpack("!Q", self._exact(8))[0]
            payload = self._exact(n)
            if opcode == 0x9:  # ping
                self._frame(0xA, payload)
                continue
            if opcode == 0x8:
                raise ConnectionError("DevTools closed the WebSocket")
            if opcode in (0x0, 0x1, 0x2):
                parts.append(payload)
                if b0 & 0x80:
                    return b"".join(parts).decode()

    def close(self) -> None:
        try:
            self._frame(0x8, b"")
        except OSError:
            pass
        self.sock.close()


class Browser:
    """A headless Chromium with a fresh profile; use as a context manager."""

    def __init__(self, executable: str, profile: Path, size: tuple[int, int] = (1200, 900)) -> None:
        self.profile = profile
        self.proc = subprocess.Popen(
            [executable, *FLAGS, f"--user-data-dir={profile}", "--remote-debugging-address=127.0.0.1",
             "--remote-debugging-port=0", f"--window-size={size[0]},{size[1]}", "about:blank"],
            stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL, stdin=subprocess.DEVNULL)
        port_file = profile / "DevToolsActivePort"
        deadline = time.monotonic() + 120
        while not (port_file.is_file() and port_file.read_text().count("\n") >= 1):
            if self.proc.poll() is not None or time.monotonic() > deadline:
                self.close()
                raise RuntimeError("Chromium did not open its DevTools port")
            time.sleep(0.05)
        self.port = int(port_file.read_text().split()[0])
        opener = urllib.request.build_opener(urllib.request.ProxyHandler({}))  # never through a proxy
        with opener.open(f"http://127.0.0.1:{self.port}/json/list", timeout=10) as fh:
            targets = json.load(fh)
        page = next(t for t in targets if t.get("type") == "page")
        self.ws = WebSocket(page["webSocketDebuggerUrl"])
        self._id = 0
        self.events: list[dict[str, Any]] = []

    def __enter__(self) -> Browser:
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()

    def close(self) -> None:
        ws = getattr(self, "ws", None)
        if ws is not None:
            ws.close()
        if self.proc.poll() is None:
            self.proc.terminate()
            try:
                self.proc.wait(timeout=10)
            except subprocess.TimeoutExpired:
                self.proc.kill()
                self.proc.wait(timeout=10)

    def call(self, method: str, **params: Any) -> dict[str, Any]:
        """Send one command and return its result; events that arrive meanwhile are kept."""
        self._id += 1
        my = self._id
        self.ws.send(json.dumps({"id": my, "method": method, "params": params}))
        while True:
            msg = json.loads(self.ws.recv())
            if msg.get("id") == my:
                if "error" in msg:
                    raise RuntimeError(f"{method}: {msg['error']}")
                return msg.get("result", {})
            if "method" in msg:
                self.events.append(msg)

    def wait_for(self, event: str, timeout: float = 120.0) -> dict[str, Any]:
        """Wait for an event (or return it if it already came)."""
        for e in self.events:
            if e["method"] == event:
                return e
        self.ws.sock.settimeout(timeout)
        while True:
            msg = json.loads(self.ws.recv())
            if "method" in msg:
                self.events.append(msg)
                if msg["method"] == event:
                    return msg


IMAGES_JS = """JSON.stringify(Array.from(document.images).map(i => ({
  scheme: i.src.split(':')[0], complete: i.complete, w: i.naturalWidth, h: i.naturalHeight, alt: i.alt})))"""


def open_page(executable: str, page: Path, profile: Path) -> tuple[list[dict], list[dict], Any]:
    """Load ``page`` from disk at 1200 x 900; return (images, DevTools events, screenshot RGB array)."""
    import io

    import numpy as np
    from matplotlib import image as mpimg

    with Browser(executable, profile) as b:
        for domain in ("Page", "Runtime", "Log", "Network"):
            b.call(f"{domain}.enable")
        b.call("Emulation.setDeviceMetricsOverride", width=1200, height=900, deviceScaleFactor=1, mobile=False)
        b.call("Page.navigate", url=page.resolve().as_uri())
        b.wait_for("Page.loadEventFired")
        images = json.loads(b.call("Runtime.evaluate", expression=IMAGES_JS, returnByValue=True)["result"]["value"])
        shot = b.call("Page.captureScreenshot", format="png")["data"]
        events = list(b.events)
    pixels = mpimg.imread(io.BytesIO(base64.b64decode(shot)), format="png")
    return images, events, np.asarray(pixels)[..., :3]
