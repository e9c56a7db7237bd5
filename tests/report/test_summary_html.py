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
from synthetic_runs import EPOCH, CheckSpec, make_record, synthetic_lot

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


# --- issue 9: unit list with links, physical axes, cautions ---


def _with_units(summary, units):
    """The summary as the store gives it, plus a per-unit list (``summary.units``)."""
    from dataclasses import fields
    from types import SimpleNamespace

    d = {f.name: getattr(summary, f.name) for f in fields(summary)}
    d["units"] = units
    return SimpleNamespace(**d, first_pass_yield=summary.first_pass_yield,
                           final_yield=summary.final_yield)


def test_units_are_listed_with_links_to_their_reports(db, tmp_path):
    reports = tmp_path / "reports"
    units = [
        {"serial": "TB3-2612-001", "plan_id": "tb3", "verdict": "pass", "attempts": 1,
         "report_path": str(reports / "tb3" / "TB3-2612-001" / "20261201T100000.000Z-pass.json")},
        {"serial": EVIL, "plan_id": "tb3", "verdict": "fail", "attempts": 3,
         "report_path": str(reports / "tb3" / "x~1" / "20261201T110000.000Z-fail.json")},
        {"serial": "TB3-2612-003", "plan_id": "tb3", "verdict": "error", "attempts": 1, "report_path": None},
    ]
    out = write_summary_html(_with_units(db.summary(lot="TB3-2612"), units), reports / "summary.html")
    page = out.read_text(encoding="utf-8")
    section = page[page.index('<section id="units">'):]
    section = section[:section.index("</section>")]
    p = _Collect()
    p.feed(section)
    links = [a["href"] for t, a in p.tags if t == "a"]
    # relative to the page, to the HTML report beside each JSON one; nothing absolute
    assert links == ["tb3/TB3-2612-001/20261201T100000.000Z-pass.html",
                     "tb3/x~1/20261201T110000.000Z-fail.html"]
    assert all((reports / link).parent.name in ("TB3-2612-001", "x~1") for link in links)
    text = "".join(p.text)
    assert "TB3-2612-001" in text and EVIL in text and "no report" in text
    rows = re.findall(r"<tr>.*?</tr>", section, re.S)
    assert len(rows) == 4  # header + three units
    assert ">3</td>" in rows[2] and "fail" in rows[2]


def test_the_unit_list_from_the_store_is_used_when_it_has_one(db):
    s = _with_units(db.summary(lot="TB3-2612"), [
        {"serial": "U-1", "plan_id": "tb3", "verdict": "pass", "attempts": 2, "report_path": "a/b-pass.json"}])
    page = render_summary_html(s, page_dir=".")
    assert 'href="a/b-pass.html"' in page and "U-1" in page


def _stats(measurement, unit, lo_edge, hi_edge, vmin, vmax, low=None, high=None):
    from benchgate.store.queries import CheckStats, Histogram

    n_bins = 20
    edges = tuple(lo_edge + (hi_edge - lo_edge) * i / n_bins for i in range(n_bins + 1))
    counts = tuple(3 if edges[i + 1] > vmin and edges[i] <= vmax else 0 for i in range(n_bins))
    return CheckStats("tb3", "steady", measurement, unit, low, high, sum(counts), (vmin + vmax) / 2,
                      0.1, vmin, vmax, None, Histogram(edges, counts))


@pytest.mark.parametrize("measurement, unit", [("thd", "%"), ("amplitude", "V"), ("frequency", "Hz"),
                                               ("startup_time", "s"), ("rms", "V"), ("vpp", "V")])
def test_histogram_axis_does_not_go_below_zero_for_positive_quantities(measurement, unit):
    # values from 0.01 to 2 with the store's 4 % padding: the padded axis would start below zero
    svg = str(histogram_svg(_stats(measurement, unit, -0.0796, 2.0896, 0.01, 2.0, high=5.0)))
    axis = re.findall(r'<text class="axis"[^>]*>([^<]*)</text>', svg)
    assert axis[0].startswith("0 ") or axis[0].startswith("0.0"), axis
    assert not any(t.startswith(("-", "−")) for t in axis), axis
    xs = [float(v) for v in re.findall(r'<rect class="bar[^"]*" x="([-0-9.]+)"', svg)]
    assert min(xs) >= 8.0  # no bar left of the plot's left margin


def test_duty_cycle_axis_stays_within_0_and_100_percent():
    svg = str(histogram_svg(_stats("duty_cycle", "%", 46.0, 100.4, 50.0, 100.0, low=45.0, high=55.0)))
    axis = re.findall(r'<text class="axis"[^>]*>([^<]*)</text>', svg)
    assert axis[1] == "100.0 %", axis


def test_quantities_that_can_be_negative_keep_their_axis():
    svg = str(histogram_svg(_stats("dc_offset", "V", -0.0796, 2.0896, 0.01, 2.0)))
    axis = re.findall(r'<text class="axis"[^>]*>([^<]*)</text>', svg)
    assert axis[0].startswith("−79.6") or axis[0].startswith("-79.6"), axis


def test_stored_values_outside_the_physical_range_are_drawn_not_hidden():
    # a negative "frequency" in the database is a problem to see, not to clip away
    svg = str(histogram_svg(_stats("frequency", "Hz", -10.4, 110.4, -6.0, 106.0)))
    axis = re.findall(r'<text class="axis"[^>]*>([^<]*)</text>', svg)
    assert axis[0].startswith(("−10.4", "-10.4")), axis


def test_summary_carries_the_bench_cautions(db):
    page = render_summary_html(db.summary(lot="TB3-2612"))
    footer = page[page.index("<footer>"):]
    for words in ("emergency stop", "isolation transformer", "ESD-safe workstation", "charged after power-off"):
        assert words in footer, words


def test_the_stores_unit_and_run_counts_are_shown_with_their_definitions(db):
    from dataclasses import replace

    s = replace(db.summary(lot="TB3-2612"), cut_short=2, units_untested=3, incomplete=1)
    page = render_summary_html(s)
    cards = page[page.index('<section id="yield">'):page.index('<section id="units">')]
    # docs/results.md: units tested have a complete run; the others are counted apart
    assert "3 more units never completed a run" in cards
    assert "1 never finished, 2 cut short (aborted or station error)" in cards
    assert "passed their latest complete run" in cards and "passed their first complete run" in cards
    assert "latest complete run" in page[page.index('<p class="notes">'):]
