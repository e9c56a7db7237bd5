"""Unit reports in a real browser (issue 6): banner, drawn plots, no console errors, no requests."""

from __future__ import annotations

import socket
import struct

import pytest
from report_samples import HOSTILE_SERIAL, make_record, save_npz, tone_capture

from benchgate.report import browser, write_reports
from benchgate.report.layout import ReportLayout

_skip = pytest.mark.skipif(browser.find_chromium() is None,
                           reason="no Chromium installed (Debian package: chromium); .ci/run installs it")


def needs_chromium(f):
    return pytest.mark.browser(_skip(f))


@pytest.fixture(scope="module")
def report(tmp_path_factory):
    root = tmp_path_factory.mktemp("browser")
    capture = tone_capture()
    layout = ReportLayout(root / "reports", "tb3", HOSTILE_SERIAL, "2026-12-01T10:00:00Z")
    layout.ensure()
    cap = layout.capture_path("capture-tone")
    sha = save_npz(capture, cap)
    rec = make_record(HOSTILE_SERIAL, fail=True, capture_file=layout.relative(cap), sha256=sha)
    return write_reports(rec, layout, {"capture-tone": capture})["html"]


@pytest.fixture(scope="module")
def loaded(report):
    return browser.check_page(report)


@needs_chromium
def test_no_network_request_of_any_kind(loaded):
    assert loaded.requests == []
    assert loaded.url.startswith("file://")


@needs_chromium
def test_no_console_errors(loaded):
    assert loaded.console_errors == []


@needs_chromium
def test_banner_text_and_escaped_serial_are_visible(loaded):
    text = loaded.text
    assert "FAIL" in text and "Unit failed" in text
    assert "frequency 1.182 kHz" in text and "above 1.030 kHz" in text
    assert HOSTILE_SERIAL in text  # shown as text, not run as markup
    assert "Bench work can hurt people and boards" in text


@needs_chromium
def test_svg_plots_have_nonzero_size(loaded):
    labels = [label for label, _, _ in loaded.svg_sizes]
    for kind in ("waveform", "envelope", "spectrum"):
        assert any(label.startswith(kind) for label in labels), labels
    assert len(loaded.svg_sizes) >= 8
    for label, w, h in loaded.svg_sizes:
        assert w > 100 and h > 20, (label, w, h)


@needs_chromium
def test_the_check_sees_requests_and_errors_when_there_are_some(tmp_path):
    # the detector itself must be able to fail: a page that fetches and logs an error
    page = tmp_path / "bad.html"
    page.write_text('<!DOCTYPE html><html><body><img src="http://127.0.0.1:9/x.png">'
                    '<script>console.error("boom")</script><svg width="10" height="10"></svg></body></html>',
                    encoding="utf-8")
    got = browser.check_page(page)
    assert any(u.startswith("http://127.0.0.1:9/") for u in got.requests)
    assert any("boom" in e for e in got.console_errors)
    assert got.svg_sizes == [("", 10, 10)]


@needs_chromium
def test_the_page_itself_is_not_counted_as_a_request_whatever_its_path(tmp_path):
    folder = tmp_path / "Ünïcode dir ~ #1"
    folder.mkdir()
    page = folder / "r.html"
    page.write_text("<!DOCTYPE html><html><body><p>ok</p></body></html>", encoding="utf-8")
    got = browser.check_page(page)
    assert got.requests == [] and got.console_errors == [] and got.text.strip() == "ok"


@needs_chromium
def test_screenshot_png(report, tmp_path_factory):
    png = tmp_path_factory.mktemp("shots") / "unit-report.png"
    browser.screenshot(report, png, width=1000)
    data = png.read_bytes()
    assert data[:8] == b"\x89PNG\r\n\x1a\n"  # PNG signature (ISO/IEC 15948, 5.2)
    width, height = struct.unpack(">II", data[16:24])  # IHDR width, height
    assert width == 1000 and height > 1500


# --- the stdlib WebSocket client, against RFC 6455 directly (no browser needed) ---


def test_accept_key_known_answer():
    # RFC 6455, 1.3: the worked example of the opening handshake
    assert browser.accept_key("dGhlIHNhbXBsZSBub25jZQ==") == "s3pPLMBiTxaQ9kYGzzhZRbK+xOo="


def _server_frame(opcode: int, payload: bytes, fin: bool = True) -> bytes:
    # RFC 6455, 5.2: server frames are not masked; 7-bit, 16-bit or 64-bit length
    head = bytes([(0x80 if fin else 0) | opcode])
    n = len(payload)
    if n < 126:
        head += bytes([n])
    elif n < 65536:
        head += bytes([126]) + struct.pack("!H", n)
    else:
        head += bytes([127]) + struct.pack("!Q", n)
    return head + payload


def _read_client_frame(sock: socket.socket) -> tuple[int, bytes]:
    def need(k):
        buf = b""
        while len(buf) < k:
            buf += sock.recv(k - len(buf))
        return buf

    b0, b1 = need(2)
    assert b1 & 0x80, "RFC 6455, 5.3: every client frame is masked"
    n = b1 & 0x7F
    if n == 126:
        n = struct.unpack("!H", need(2))[0]
    elif n == 127:
        n = struct.unpack("!Q", need(8))[0]
    mask = need(4)
    data = need(n)
    return b0 & 0x0F, bytes(b ^ mask[i % 4] for i, b in enumerate(data))


def test_frames_of_every_length_fragments_and_ping():
    client, server = socket.socketpair()
    client.settimeout(5)
    server.settimeout(5)
    try:
        ws = browser._WebSocket(client)
        big = ("x" * 70_000).encode()
        server.sendall(_server_frame(1, b"hello") + _server_frame(1, b"m" * 300) + _server_frame(1, big))
        assert ws.recv() == "hello"
        assert ws.recv() == "m" * 300
        assert ws.recv() == "x" * 70_000
        # a fragmented message with a ping between the fragments (RFC 6455, 5.4 and 5.5.2)
        server.sendall(_server_frame(1, b"frag", fin=False) + _server_frame(9, b"p!") +
                       _server_frame(0, "ment ✓".encode(), fin=True))
        assert ws.recv() == "fragment ✓"
        assert _read_client_frame(server) == (0xA, b"p!")  # pong echoes the ping's data
        ws.send('{"id": 1}')
        assert _read_client_frame(server) == (1, b'{"id": 1}')
        ws.send("y" * 5000)
        assert _read_client_frame(server) == (1, b"y" * 5000)
        server.sendall(_server_frame(8, struct.pack("!H", 1000)))
        with pytest.raises(browser.BrowserError, match="closed"):
            ws.recv()
    finally:
        client.close()
        server.close()


def test_a_timeout_mid_frame_loses_nothing():
    client, server = socket.socketpair()
    try:
        client.settimeout(0.05)
        ws = browser._WebSocket(client)
        frame = _server_frame(1, b"a" * 1000)
        server.sendall(frame[:500])
        with pytest.raises(TimeoutError):
            ws.recv()
        server.sendall(frame[500:])
        assert ws.recv() == "a" * 1000
    finally:
        client.close()
        server.close()


@needs_chromium
def test_unit_report_fits_700_px(tmp_path):
    # a real demo-sized report: long measurement names, derivation details, long reasons
    from report_samples import make_record as _mk

    capture = tone_capture()
    layout = ReportLayout(tmp_path, "tb3", "TB3-2612-002", "2026-12-01T10:00:00Z")
    layout.ensure()
    cap = layout.capture_path("capture-tone")
    sha = save_npz(capture, cap)
    rec = _mk("TB3-2612-002", fail=True, capture_file=layout.relative(cap), sha256=sha)
    rec.steps[2].checks[0].measurement = "supply_current"
    html = write_reports(rec, layout, {"capture-tone": capture})["html"]
    assert browser.overflow(html, width=700) == []
    shot = browser.screenshot(html, tmp_path / "unit-700.png", width=700)
    width, _ = struct.unpack(">II", shot.read_bytes()[16:24])  # PNG IHDR (ISO/IEC 15948, 11.2.2)
    assert width == 700


@needs_chromium
def test_the_overflow_check_can_fail(tmp_path):
    page = tmp_path / "wide.html"
    page.write_text('<!DOCTYPE html><html><body><table style="width:300px;table-layout:fixed"><tr>'
                    '<td style="white-space:nowrap;width:50px">0.02695&nbsp;%&nbsp;0.021&nbsp;%</td><td>x</td>'
                    '</tr></table><div style="width:900px">wide</div></body></html>', encoding="utf-8")
    found = browser.overflow(page, width=700)
    assert any(f.startswith("td") and "content" in f for f in found), found
    assert any(f.startswith("page:") for f in found), found
