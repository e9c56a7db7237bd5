"""Unit reports in a real browser: the system Chromium driven by Playwright (issues 6 and 13).

Banner, drawn plots, no console errors, no requests; the checks themselves are shown able to fail.
"""

from __future__ import annotations

import re
import struct
import sys

import pytest
from report_samples import HOSTILE_SERIAL, make_record, save_npz, tone_capture

from benchgate.errors import BrowserError
from benchgate.report import browser, write_reports
from benchgate.report.layout import ReportLayout

_skip = pytest.mark.skipif(browser.unavailable() is not None,
                           reason=f"{browser.unavailable()} (.ci/run installs Chromium; the test extra Playwright)")


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


@needs_chromium
def test_print_pdf_a4_and_letter(report, tmp_path):
    sizes = {}
    for paper in ("a4", "letter"):
        out = browser.print_pdf(report, tmp_path / f"r-{paper}.pdf", paper=paper)
        data = out.read_bytes()
        assert data.startswith(b"%PDF-")  # ISO 32000-1, 7.5.2: the file header
        box = re.search(rb"/MediaBox\s*\[\s*0 0 ([0-9.]+) ([0-9.]+)\s*\]", data)
        sizes[paper] = (float(box.group(1)), float(box.group(2)))
        assert len(re.findall(rb"/Type\s*/Page(?![a-z])", data)) >= 2  # the report runs over pages
    # ISO 216 A4 = 210 mm x 297 mm = 595.3 x 841.9 pt; ANSI Letter = 8.5 in x 11 in = 612 x 792 pt
    # (Chromium rounds the page to whole CSS pixels, so allow 1.5 pt)
    assert sizes["a4"] == (pytest.approx(595.3, abs=1.5), pytest.approx(841.9, abs=1.5))
    assert sizes["letter"] == (pytest.approx(612.0, abs=1.5), pytest.approx(792.0, abs=1.5))


@needs_chromium
def test_one_browser_serves_several_checks(report, tmp_path):
    with browser.session() as b:
        first = browser.check_page(report, browser=b)
        second = browser.overflow(report, width=1000, browser=b)
    assert first.requests == [] and second == []


def test_without_playwright_the_message_says_what_to_install(monkeypatch):
    monkeypatch.setitem(sys.modules, "playwright", None)  # import fails as if not installed
    monkeypatch.setitem(sys.modules, "playwright.sync_api", None)
    assert browser.unavailable() == browser.NO_PLAYWRIGHT
    with pytest.raises(BrowserError, match=r"pip install 'benchgate\[browser\]'"):
        with browser.session():
            pass


def test_without_chromium_the_message_names_the_package(monkeypatch):
    pytest.importorskip("playwright.sync_api")
    monkeypatch.setattr(browser.shutil, "which", lambda name: None)
    monkeypatch.setattr(browser.os, "access", lambda path, mode: False)
    assert browser.find_chromium() is None
    assert browser.unavailable() == browser.NO_BROWSER
    with pytest.raises(BrowserError, match="install Debian's chromium package"):
        browser.check_page(__file__)


def test_a_browser_that_cannot_start_is_one_clear_error(tmp_path):
    pytest.importorskip("playwright.sync_api")
    fake = tmp_path / "chromium"
    fake.write_text("#!/bin/sh\necho 'cannot open display' >&2\nexit 3\n")
    fake.chmod(0o755)
    with pytest.raises(BrowserError, match="did not start"):
        with browser.session(timeout=20, chromium=str(fake)):
            pass


@needs_chromium
def test_a_missing_local_file_is_a_request_and_an_error(tmp_path):
    # what the browser itself logs (a failed load) counts as a console error, as any script error
    page = tmp_path / "missing.html"
    page.write_text('<!DOCTYPE html><html><body><img src="nothere.png"><p>x</p></body></html>',
                    encoding="utf-8")
    got = browser.check_page(page)
    assert [u.rsplit("/", 1)[1] for u in got.requests] == ["nothere.png"]
    assert any("ERR_FILE_NOT_FOUND" in e for e in got.console_errors), got.console_errors


@needs_chromium
def test_a_network_request_is_seen_but_never_sent(tmp_path):
    import socket

    server = socket.socket()
    server.bind(("127.0.0.1", 0))
    server.listen(4)
    port = server.getsockname()[1]
    page = tmp_path / "net.html"
    page.write_text(f'<!DOCTYPE html><html><body><img src="http://127.0.0.1:{port}/x.png"></body></html>',
                    encoding="utf-8")
    try:
        got = browser.check_page(page)
        # a connection the browser had made would wait in the listen backlog now
        server.setblocking(False)
        with pytest.raises(BlockingIOError):
            server.accept()
    finally:
        server.close()
    assert got.requests == [f"http://127.0.0.1:{port}/x.png"]
