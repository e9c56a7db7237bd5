"""Unit reports in a real browser (issue 6): banner, drawn plots, no console errors, no requests."""

from __future__ import annotations

import struct

import pytest
from report_samples import HOSTILE_SERIAL, make_record, save_npz, tone_capture

from benchgate.report import browser, write_reports
from benchgate.report.layout import ReportLayout

pytestmark = [
    pytest.mark.browser,
    pytest.mark.skipif(browser.find_chromium() is None,
                       reason="no Chromium installed (Debian package: chromium); .ci/run installs it"),
]


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


def test_no_network_request_of_any_kind(loaded):
    assert loaded.requests == []
    assert loaded.url.startswith("file://")


def test_no_console_errors(loaded):
    assert loaded.console_errors == []


def test_banner_text_and_escaped_serial_are_visible(loaded):
    text = loaded.text
    assert "FAIL" in text and "Unit failed" in text
    assert "frequency 1.182 kHz" in text and "above 1.030 kHz" in text
    assert HOSTILE_SERIAL in text  # shown as text, not run as markup
    assert "Bench work can hurt people and boards" in text


def test_svg_plots_have_nonzero_size(loaded):
    labels = [label for label, _, _ in loaded.svg_sizes]
    for kind in ("waveform", "envelope", "spectrum"):
        assert any(label.startswith(kind) for label in labels), labels
    assert len(loaded.svg_sizes) >= 8
    for label, w, h in loaded.svg_sizes:
        assert w > 100 and h > 20, (label, w, h)


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


def test_screenshot_png(report, tmp_path_factory):
    png = tmp_path_factory.mktemp("shots") / "unit-report.png"
    browser.screenshot(report, png, width=1000)
    data = png.read_bytes()
    assert data[:8] == b"\x89PNG\r\n\x1a\n"  # PNG signature (ISO/IEC 15948, 5.2)
    width, height = struct.unpack(">II", data[16:24])  # IHDR width, height
    assert width == 1000 and height > 1500
