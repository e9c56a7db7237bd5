"""``benchgate report``: re-render a stored unit report's HTML, and print it to PDF."""

from __future__ import annotations

import re
import sys
from pathlib import Path

import pytest

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "report"))
from report_samples import HOSTILE_SERIAL, make_record, save_npz, tone_capture  # noqa: E402

from benchgate.cli import main  # noqa: E402
from benchgate.report import browser, write_reports  # noqa: E402
from benchgate.report.layout import ReportLayout  # noqa: E402


@pytest.fixture
def stored(tmp_path):
    capture = tone_capture()
    layout = ReportLayout(tmp_path / "reports", "tb3", HOSTILE_SERIAL, "2026-12-01T10:00:00Z")
    layout.ensure()
    cap = layout.capture_path("capture-tone")
    sha = save_npz(capture, cap)
    rec = make_record(HOSTILE_SERIAL, capture_file=layout.relative(cap), sha256=sha)
    return write_reports(rec, layout, {"capture-tone": capture})


def test_rerenders_html_beside_the_json(stored, capsys):
    stored["html"].unlink()
    assert main(["report", str(stored["json"])]) == 0
    out = capsys.readouterr().out
    assert out.strip() == f"html: {stored['html']}"
    html = stored["html"].read_text(encoding="utf-8")
    assert "aria-label=\"spectrum, channel out\"" in html  # captures found beside the JSON
    assert "plots not drawn" not in html and "changed since the run" not in html


def test_html_elsewhere_still_checks_the_captures_beside_the_json(stored, tmp_path):
    target = tmp_path / "elsewhere" / "copy.html"
    assert main(["report", str(stored["json"]), "--html", str(target)]) == 0
    html = target.read_text(encoding="utf-8")
    assert "not beside the report" not in html and "waveform, channel out" in html


def test_missing_capture_is_said_and_report_still_written(stored, capsys):
    for npz in stored["json"].parent.glob("*.npz"):
        npz.unlink()
    assert main(["report", str(stored["json"])]) == 0
    err = capsys.readouterr().err
    assert "capture file missing; its plots are left out" in err
    assert "capture not available" in stored["html"].read_text(encoding="utf-8")


def test_bad_json_is_one_line_with_position(tmp_path, capsys):
    bad = tmp_path / "bad.json"
    bad.write_text("{\n  nope", encoding="utf-8")
    assert main(["report", str(bad)]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and err[0].startswith(f"benchgate: {bad}:2:3: not valid JSON")


def test_pdf_without_a_browser_says_so(stored, tmp_path, monkeypatch, capsys):
    monkeypatch.setattr(browser, "find_chromium", lambda: None)
    assert main(["report", str(stored["json"]), "--pdf", str(tmp_path / "r.pdf")]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert err == ["benchgate: no Chromium found; install Debian's chromium package"]
    assert not (tmp_path / "r.pdf").exists()


def test_pdf_without_playwright_says_what_to_install(stored, tmp_path, monkeypatch, capsys):
    import sys

    monkeypatch.setitem(sys.modules, "playwright", None)  # as if the browser extra were not installed
    monkeypatch.setitem(sys.modules, "playwright.sync_api", None)
    assert main(["report", str(stored["json"]), "--pdf", str(tmp_path / "r.pdf")]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "pip install 'benchgate[browser]'" in err[0] and "Playwright" in err[0]
    assert not (tmp_path / "r.pdf").exists()


@pytest.mark.browser
@pytest.mark.skipif(browser.unavailable() is not None, reason=str(browser.unavailable()))
@pytest.mark.parametrize("paper", ["a4", "letter"])
def test_pdf_with_the_browser(stored, tmp_path, capsys, paper):
    pdf = tmp_path / f"r-{paper}.pdf"
    assert main(["report", str(stored["json"]), "--pdf", str(pdf), "--paper", paper]) == 0
    data = pdf.read_bytes()
    assert data.startswith(b"%PDF-")  # ISO 32000-1, 7.5.2: file header
    # ISO 216 A4 is 595 x 842 pt; ANSI Letter 612 x 792 pt (1 pt = 1/72 in)
    want = (595.3, 841.9) if paper == "a4" else (612.0, 792.0)
    boxes = re.findall(rb"/MediaBox\s*\[\s*0\s+0\s+([0-9.]+)\s+([0-9.]+)\s*\]", data)
    assert boxes, "no page in the PDF"
    for w, h in boxes:
        assert float(w) == pytest.approx(want[0], abs=1.0) and float(h) == pytest.approx(want[1], abs=1.0)
    assert capsys.readouterr().out.strip() == f"pdf: {pdf}"


def test_rerender_draws_the_stored_views_and_still_checks_the_files(tmp_path, capsys):
    from benchgate.analysis import analyze

    capture = tone_capture()
    layout = ReportLayout(tmp_path / "reports", "tb3", "TB3-0101", "2026-12-01T10:00:00Z")
    layout.ensure()
    cap = layout.capture_path("capture-tone")
    rec = make_record("TB3-0101", capture_file=layout.relative(cap), sha256=save_npz(capture, cap))
    rec.steps[1].capture.views = analyze(capture, ["frequency"], views=True).views
    paths = write_reports(rec, layout, {})
    cap.write_bytes(cap.read_bytes() + b"\0")  # tampered after the run
    assert main(["report", str(paths["json"])]) == 0
    html = paths["html"].read_text(encoding="utf-8")
    assert "has changed since the run (SHA-256 differs)" in html
    assert 'aria-label="spectrum, channel out"' in html  # drawn from the record's views
