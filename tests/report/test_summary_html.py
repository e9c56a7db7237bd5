"""The lot summary page: self-contained, escaped, with histograms and the limits marked."""

from __future__ import annotations

import re
from datetime import timedelta
from html.parser import HTMLParser

import pytest
from markupsafe import escape

from benchgate.judge.rules import Verdict
from benchgate.report.summary_html import (
    SAFETY,
    histogram_svg,
    render_summary_html,
    write_summary_html,
)
from benchgate.store import ResultsDB
from benchgate.store.synthetic import EPOCH, CheckSpec, make_record, synthetic_lot

EVIL = '<script>alert("x")</script>&\'"'


class _Collect(HTMLParser):
    def __init__(self):
        super().__init__()
        self.tags: list[tuple[str, dict]] = []
        self.text: list[str] = []

    def handle_starttag(self, tag, attrs):
        self.tags.append((tag, dict(attrs)))

    def handle_data(self, data):
        self.text.append(data)


@pytest.fixture
def db(tmp_path):
    with ResultsDB.open(tmp_path / "r.sqlite") as d:
        for rec in synthetic_lot(60, seed=5, defect_fraction=0.2, lot="TB3-2612"):
            d.finish_run(rec, None)
        yield d


def _hostile(db):
    t = EPOCH + timedelta(days=1)
    db.finish_run(make_record(EVIL, [CheckSpec(EVIL, "frequency", 2000.0, "Hz", 860.0, 1050.0)],
                              started=t, lot=EVIL, plan_id=EVIL), None)
    db.finish_run(make_record("S-2", [], started=t, lot=EVIL, plan_id=EVIL, verdict=Verdict.ERROR,
                              reason=f"adc: {EVIL}"), None)
    return db.summary(lot=EVIL)


def test_no_external_resources(db):
    page = render_summary_html(db.summary(lot="TB3-2612"))
    low = page.lower()
    assert "http:" not in low and "https:" not in low and "//" not in re.sub(r"<!--.*?-->", "", low)
    assert "<script" not in low and "<link" not in low and "@import" not in low and "url(" not in low
    p = _Collect()
    p.feed(page)
    for _tag, attrs in p.tags:
        for k in ("src", "href", "xlink:href", "action"):
            assert k not in attrs
        assert not any(k.startswith("on") for k in attrs)  # no event handlers either


def test_text_is_escaped(db):
    page = render_summary_html(_hostile(db))
    assert "<script>" not in page
    assert "&lt;script&gt;alert(" in page
    p = _Collect()
    p.feed(page)
    assert not any(t == "script" for t, _ in p.tags)
    text = "".join(p.text)
    assert EVIL in text  # shown verbatim once unescaped by the parser
    assert f"adc: {EVIL}" in text  # the run's reason in the Pareto by reason


def test_histograms_with_limits(db):
    s = db.summary(lot="TB3-2612")
    page = render_summary_html(s)
    assert page.count('<svg class="hist"') == len(s.checks) == 5
    two_sided = sum(c.low is not None and c.high is not None for c in s.checks)
    one_sided = len(s.checks) - two_sided
    assert page.count('<line class="limit"') == 2 * two_sided + one_sided
    assert "LSL 860.0 Hz" in page and "USL 1.050 kHz" in page
    assert page.count('<line class="mean"') == len(s.checks)


def test_histogram_svg_bars_match_counts(db):
    (c,) = [c for c in db.summary().checks if c.measurement == "frequency"]
    svg = str(histogram_svg(c))
    bars = re.findall(r'<rect class="bar( out)?"', svg)
    assert len(bars) == sum(1 for k in c.histogram.counts if k > 0)
    titles = [int(t) for t in re.findall(r"<title>(\d+)</title>", svg)]
    assert sum(titles) == c.n


def test_numbers_and_safety_footer(db):
    s = db.summary(lot="TB3-2612")
    page = render_summary_html(s)
    assert f"{100 * s.first_pass_yield:.1f} %" in page
    assert f"{100 * s.final_yield:.1f} %" in page
    assert str(escape(SAFETY)) in page and "<footer>" in page
    assert "ISO 22514-2" in page


def test_empty_summary_renders(tmp_path):
    with ResultsDB.open(tmp_path / "e.sqlite") as d:
        page = render_summary_html(d.summary())
    assert "No check failed" in page and "No valid numeric values" in page and "—" in page


def test_write(db, tmp_path):
    out = write_summary_html(db.summary(), tmp_path / "deep" / "summary.html")
    assert out.read_text(encoding="utf-8").startswith("<!DOCTYPE html>")
    assert not list((tmp_path / "deep").glob("*.part"))
