"""Reports in a real browser: headless Chromium driven over the DevTools protocol.

Nothing but the standard library: Chromium is started with ``--remote-debugging-port=0`` and a
fresh ``--user-data-dir``; the port it chose is read from the ``DevToolsActivePort`` file there;
a minimal RFC 6455 WebSocket client (:class:`_WebSocket`) then speaks the protocol to one page.

- :func:`check_page` loads an HTML file and returns a :class:`PageCheck`: console errors, every
  network request other than the file itself and ``data:`` URIs, the size of each ``<svg>``, and
  the page text.
- :func:`screenshot` writes a PNG, :func:`print_pdf` a PDF (A4 or Letter).
"""

from __future__ import annotations

import base64
import contextlib
import hashlib
import json
import os
import shutil
import signal
import socket
import struct
import subprocess
import tempfile
import time
from collections.abc import Iterator
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any
from urllib.parse import unquote

from benchgate.errors import BenchgateError

CANDIDATES = ("chromium", "chromium-browser", "google-chrome")
FLAGS = ("--headless", "--no-sandbox", "--disable-gpu", "--disable-background-networking",
         "--disable-component-update", "--disable-sync", "--no-first-run", "--disable-quic",
         "--no-default-browser-check", "--hide-scrollbars", "--mute-audio")
#: paper sizes in inches (ISO 216 A4 = 210 mm × 297 mm; ANSI Letter = 8.5 in × 11 in).
PAPER = {"a4": (210 / 25.4, 297 / 25.4), "letter": (8.5, 11.0)}
NO_BROWSER = "no Chromium found; install Debian's chromium package"


class BrowserError(BenchgateError):
    """Chromium missing, failing to start, or misbehaving on the DevTools connection."""

    def where(self) -> str:
        return "chromium"


def find_chromium() -> str | None:
    """Path of a Chromium-family browser on PATH (or /usr/bin/chromium), or None."""
    for name in CANDIDATES:
        found = shutil.which(name)
        if found:
            return found
    return "/usr/bin/chromium" if os.access("/usr/bin/chromium", os.X_OK) else None


@dataclass
class PageCheck:
    """What loading one page did."""

    url: str
    console_errors: list[str] = field(default_factory=list)
    requests: list[str] = field(default_factory=list)  # anything but the file itself and data: URIs
    svg_sizes: list[tuple[str, float, float]] = field(default_factory=list)  # (label, width, height) CSS px
    text: str = ""


class _WebSocket:
    """The client half of RFC 6455, enough for DevTools: text frames, ping/pong, close."""

    def __init__(self, sock: socket.socket, buffered: bytes = b""):
        self.sock = sock
        self._buf = buffered

    @classmethod
    def connect(cls, host: str, port: int, path: str, timeout: float) -> _WebSocket:
        """Open a TCP connection and perform the opening handshake (RFC 6455, 4.1)."""
        try:
            sock = socket.create_connection((host, port), timeout=timeout)
        except OSError as exc:
            raise BrowserError(f"cannot connect to DevTools on port {port}: {exc}") from None
        key = base64.b64encode(os.urandom(16)).decode()
        request = (f"GET {path} HTTP/1.1\r\nHost: {host}:{port}\r\nUpgrade: websocket\r\n"
                   f"Connection: Upgrade\r\nSec-WebSocket-Key: {key}\r\nSec-WebSocket-Version: 13\r\n\r\n")
        try:
            sock.sendall(request.encode())
            head = b""
            while b"\r\n\r\n" not in head:
                chunk = sock.recv(4096)
                if not chunk:
                    raise BrowserError("DevTools closed the connection during the WebSocket handshake")
                head += chunk
        except OSError as exc:
            sock.close()
            raise BrowserError(f"WebSocket handshake with DevTools failed: {exc}") from None
        head, rest = head.split(b"\r\n\r\n", 1)
        lines = head.decode("latin-1").split("\r\n")
        headers = {k.strip().lower(): v.strip() for k, _, v in (ln.partition(":") for ln in lines[1:])}
        if " 101 " not in lines[0] + " " or headers.get("sec-websocket-accept") != accept_key(key):
            sock.close()
            raise BrowserError(f"DevTools refused the WebSocket upgrade: {lines[0]}")
        return cls(sock, rest)

    def _fill(self, n: int) -> None:
        """Buffer at least ``n`` bytes; a timeout leaves the buffer intact (nothing consumed)."""
        while len(self._buf) < n:
            try:
                chunk = self.sock.recv(max(65536, n - len(self._buf)))
            except TimeoutError:
                raise
            except OSError as exc:
                raise BrowserError(f"DevTools connection failed: {exc}") from None
            if not chunk:
                raise BrowserError("DevTools connection closed")
            self._buf += chunk

    def _frame(self) -> tuple[int, bool, bytes]:
        """Take one whole frame off the buffer: (opcode, fin, payload) (RFC 6455, 5.2)."""
        self._fill(2)
        b0, b1 = self._buf[0], self._buf[1]
        n, at = b1 & 0x7F, 2
        if n == 126:
            self._fill(4)
            n, at = struct.unpack("!H", self._buf[2:4])[0], 4
        elif n == 127:
            self._fill(10)
            n, at = struct.unpack("!Q", self._buf[2:10])[0], 10
        masked = bool(b1 & 0x80)
        end = at + (4 if masked else 0) + n
        self._fill(end)
        payload = self._buf[end - n:end]
        if masked:
            payload = _mask(payload, self._buf[at:at + 4])
        self._buf = self._buf[end:]
        return b0 & 0x0F, bool(b0 & 0x80), payload

    def _send_frame(self, opcode: int, payload: bytes) -> None:
        head = bytes([0x80 | opcode])
        n = len(payload)
        if n < 126:
            head += bytes([0x80 | n])
        elif n < 1 << 16:
            head += bytes([0x80 | 126]) + struct.pack("!H", n)
        else:
            head += bytes([0x80 | 127]) + struct.pack("!Q", n)
        mask = os.urandom(4)  # a client masks every frame (RFC 6455, 5.3)
        masked = bytes(b ^ mask[i % 4] for i, b in enumerate(payload)) if n < 4096 else _mask(payload, mask)
        self.sock.sendall(head + mask + masked)

    def send(self, text: str) -> None:
        self._send_frame(0x1, text.encode())

    def recv(self) -> str:
        """The next text message (control frames answered on the way)."""
        parts: list[bytes] = []
        while True:
            opcode, fin, payload = self._frame()
            if opcode == 0x9:  # ping -> pong with the same payload (RFC 6455, 5.5.2)
                self._send_frame(0xA, payload)
                continue
            if opcode == 0xA:
                continue
            if opcode == 0x8:
                raise BrowserError("DevTools closed the connection")
            parts.append(payload)
            if fin:
                return b"".join(parts).decode("utf-8")

    def close(self) -> None:
        with contextlib.suppress(OSError):
            self._send_frame(0x8, struct.pack("!H", 1000))
        with contextlib.suppress(OSError):
            self.sock.close()


def accept_key(key: str) -> str:
    """The ``Sec-WebSocket-Accept`` value for a ``Sec-WebSocket-Key`` (RFC 6455, 1.3 and 4.2.2)."""
    guid = "258EAFA5-E914-47DA-95CA-C5AB0DC85B11"
    return base64.b64encode(hashlib.sha1((key + guid).encode()).digest()).decode()


def _mask(payload: bytes, mask: bytes) -> bytes:
    whole = (mask * (len(payload) // 4 + 1))[: len(payload)]
    return (int.from_bytes(payload, "little") ^ int.from_bytes(whole, "little")).to_bytes(len(payload), "little")


class _Page:
    """One DevTools page session: commands with ids, events kept in order."""

    def __init__(self, ws: _WebSocket, timeout: float):
        self.ws = ws
        self.timeout = timeout
        self.events: list[dict[str, Any]] = []
        self._next = 0

    def call(self, method: str, **params: Any) -> dict[str, Any]:
        self._next += 1
        ident = self._next
        self.ws.send(json.dumps({"id": ident, "method": method, "params": params}))
        deadline = time.monotonic() + self.timeout
        while time.monotonic() < deadline:
            msg = self._next_message(method)
            if msg.get("id") == ident:
                if "error" in msg:
                    raise BrowserError(f"{method} failed: {msg['error'].get('message')}")
                return msg.get("result", {})
            if "method" in msg:
                self.events.append(msg)
        raise BrowserError(f"{method}: no answer from Chromium within {self.timeout:g} s")

    def _next_message(self, waiting_for: str) -> dict[str, Any]:
        try:
            return json.loads(self.ws.recv())
        except TimeoutError:
            raise BrowserError(f"{waiting_for}: no answer from Chromium within {self.timeout:g} s") from None

    def wait_for(self, method: str, seen: int = 0) -> dict[str, Any]:
        """Wait for event ``method`` (looking at events after index ``seen`` too)."""
        for ev in self.events[seen:]:
            if ev["method"] == method:
                return ev
        deadline = time.monotonic() + self.timeout
        while time.monotonic() < deadline:
            msg = self._next_message(method)
            if "method" in msg:
                self.events.append(msg)
                if msg["method"] == method:
                    return msg
        raise BrowserError(f"page did not reach {method} within {self.timeout:g} s")

    def drain(self, seconds: float) -> None:
        """Collect events for ``seconds`` more (late requests after the load event)."""
        end = time.monotonic() + seconds
        self.ws.sock.settimeout(0.05)
        try:
            while time.monotonic() < end:
                try:
                    msg = json.loads(self.ws.recv())
                except TimeoutError:
                    continue
                if "method" in msg:
                    self.events.append(msg)
        finally:
            self.ws.sock.settimeout(self.timeout)

    def evaluate(self, expression: str) -> Any:
        res = self.call("Runtime.evaluate", expression=expression, returnByValue=True)
        if "exceptionDetails" in res:
            raise BrowserError(f"evaluating in the page failed: {res['exceptionDetails'].get('text')}")
        return res.get("result", {}).get("value")


@contextlib.contextmanager
def _browser(timeout: float = 30.0, chromium: str | None = None) -> Iterator[_Page]:
    exe = chromium or find_chromium()
    if exe is None:
        raise BrowserError(NO_BROWSER)
    profile = tempfile.mkdtemp(prefix="benchgate-chromium-")
    proc = subprocess.Popen(
        [exe, *FLAGS, "--remote-debugging-port=0", f"--user-data-dir={profile}", "about:blank"],
        stdin=subprocess.DEVNULL, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE,
        start_new_session=True,
    )
    ws = None
    try:
        port_file = Path(profile) / "DevToolsActivePort"
        deadline = time.monotonic() + timeout
        while not (port_file.exists() and len(port_file.read_text().splitlines()) >= 2):
            if proc.poll() is not None:
                err = proc.stderr.read().decode(errors="replace").strip().splitlines() if proc.stderr else []
                raise BrowserError(f"Chromium exited at start ({proc.returncode}): {(err or ['no message'])[-1]}")
            if time.monotonic() > deadline:
                raise BrowserError(f"Chromium did not open its DevTools port within {timeout:g} s")
            time.sleep(0.05)
        port = int(port_file.read_text().splitlines()[0])
        browser_ws = _WebSocket.connect("127.0.0.1", port, port_file.read_text().splitlines()[1], timeout)
        root = _Page(browser_ws, timeout)
        target = root.call("Target.createTarget", url="about:blank")["targetId"]
        browser_ws.close()
        ws = _WebSocket.connect("127.0.0.1", port, f"/devtools/page/{target}", timeout)
        yield _Page(ws, timeout)
    finally:
        if ws is not None:
            ws.close()
        with contextlib.suppress(ProcessLookupError, PermissionError):
            os.killpg(proc.pid, signal.SIGTERM)  # the browser's own process group (it was started here)
        try:
            proc.wait(timeout=10)
        except subprocess.TimeoutExpired:
            with contextlib.suppress(ProcessLookupError, PermissionError):
                os.killpg(proc.pid, signal.SIGKILL)
            proc.wait(timeout=10)
        if proc.stderr:
            proc.stderr.close()
        shutil.rmtree(profile, ignore_errors=True)


def _file_url(html_path: str | Path) -> str:
    path = Path(html_path).resolve()
    if not path.is_file():
        raise BrowserError(f"{path}: no such file")
    return path.as_uri()


def _load(page: _Page, url: str, *, width: int = 1000, media: str = "screen") -> None:
    for domain in ("Page", "Network", "Runtime", "Log"):
        page.call(f"{domain}.enable")
    page.call("Network.setCacheDisabled", cacheDisabled=True)
    page.call("Emulation.setDeviceMetricsOverride", width=width, height=800, deviceScaleFactor=1, mobile=False)
    page.call("Emulation.setEmulatedMedia", media=media)
    seen = len(page.events)
    page.call("Page.navigate", url=url)
    page.wait_for("Page.loadEventFired", seen)
    page.drain(0.3)


_SVG_SIZES = """JSON.stringify(Array.from(document.querySelectorAll('svg')).map(function (s) {
  var r = s.getBoundingClientRect();
  return [s.getAttribute('aria-label') || s.id || '', r.width, r.height]; }))"""


def check_page(html_path: str | Path, *, timeout: float = 30.0) -> PageCheck:
    """Load ``html_path`` in headless Chromium and report what happened.

    Returns
    -------
    PageCheck
        Console errors (console.error/assert calls, uncaught exceptions, error log entries),
        every request other than the page's own file and ``data:`` URIs, the rendered size of
        each ``<svg>`` and the page's visible text.
    """
    url = _file_url(html_path)
    with _browser(timeout) as page:
        _load(page, url)
        result = PageCheck(url=url)
        for ev in page.events:
            method, p = ev["method"], ev.get("params", {})
            if method == "Network.requestWillBeSent":
                req = p.get("request", {}).get("url", "")
                if unquote(req.split("#")[0]) != unquote(url) and not req.startswith("data:"):
                    result.requests.append(req)
            elif method == "Runtime.consoleAPICalled" and p.get("type") in ("error", "assert"):
                args = " ".join(str(a.get("value", a.get("description", ""))) for a in p.get("args", []))
                result.console_errors.append(f"console.{p.get('type')}: {args}")
            elif method == "Runtime.exceptionThrown":
                d = p.get("exceptionDetails", {})
                result.console_errors.append(f"exception: {d.get('text')} {d.get('exception', {}).get('description', '')}")
            elif method == "Log.entryAdded" and p.get("entry", {}).get("level") == "error":
                e = p["entry"]
                result.console_errors.append(f"{e.get('source')}: {e.get('text')} {e.get('url', '')}".strip())
        result.svg_sizes = [tuple(x) for x in json.loads(page.evaluate(_SVG_SIZES) or "[]")]
        result.text = page.evaluate("document.body ? document.body.innerText : ''") or ""
    return result


_OVERFLOW = """JSON.stringify((function () {
  var out = [], vw = document.documentElement.clientWidth;
  if (document.documentElement.scrollWidth > vw) out.push('page: ' + document.documentElement.scrollWidth + ' px wide');
  Array.from(document.querySelectorAll('body *')).forEach(function (e) {
    var r = e.getBoundingClientRect(), cs = getComputedStyle(e);
    if (r.width === 0 || cs.display === 'none' || cs.visibility === 'hidden') return;
    var what = e.tagName.toLowerCase() + (e.className && e.className.baseVal === undefined ? '.' + e.className : '');
    if (r.right > vw + 0.5) out.push(what + ' ends at ' + Math.round(r.right) + ' px');
    if (e.scrollWidth > e.clientWidth + 1 && cs.overflowX === 'visible' && e.clientWidth > 0
        && !(e instanceof SVGElement))
      out.push(what + ' content ' + e.scrollWidth + ' px in ' + e.clientWidth + ' px: ' + (e.innerText || '').slice(0, 40));
  });
  return out; })())"""


def overflow(html_path: str | Path, *, width: int = 700, timeout: float = 30.0) -> list[str]:
    """Elements of ``html_path`` that do not fit a ``width``-pixel-wide window.

    Anything ending right of the viewport, and any box whose content is wider than the box
    (text running into the next table cell); an empty list when the page fits.
    """
    url = _file_url(html_path)
    with _browser(timeout) as page:
        _load(page, url, width=width)
        return list(json.loads(page.evaluate(_OVERFLOW) or "[]"))


def screenshot(html_path: str | Path, png_path: str | Path, *, width: int = 1000, media: str = "screen",
               timeout: float = 30.0) -> Path:
    """Write a full-page PNG of ``html_path`` (``media="print"`` shows the print styles)."""
    url = _file_url(html_path)
    with _browser(timeout) as page:
        _load(page, url, width=width, media=media)
        size = page.call("Page.getLayoutMetrics").get("cssContentSize", {})
        height = max(1, int(size.get("height", 800)))
        shot = page.call("Page.captureScreenshot", format="png", captureBeyondViewport=True,
                         clip={"x": 0, "y": 0, "width": width, "height": height, "scale": 1})
    out = Path(png_path)
    out.parent.mkdir(parents=True, exist_ok=True)
    out.write_bytes(base64.b64decode(shot["data"]))
    return out


def print_pdf(html_path: str | Path, pdf_path: str | Path, *, paper: str = "a4", timeout: float = 60.0) -> Path:
    """Print ``html_path`` to a PDF on A4 or Letter paper (page margins from the report's @page)."""
    if paper not in PAPER:
        raise BrowserError(f"unknown paper {paper!r}; expected one of {', '.join(PAPER)}")
    w, h = PAPER[paper]
    url = _file_url(html_path)
    with _browser(timeout) as page:
        _load(page, url, media="print")
        pdf = page.call("Page.printToPDF", printBackground=True, paperWidth=w, paperHeight=h,
                        marginTop=0, marginBottom=0, marginLeft=0, marginRight=0,
                        preferCSSPageSize=False)
    out = Path(pdf_path)
    out.parent.mkdir(parents=True, exist_ok=True)
    out.write_bytes(base64.b64decode(pdf["data"]))
    return out
