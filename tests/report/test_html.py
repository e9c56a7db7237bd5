"""The HTML unit report: self-contained, escaped, with a verdict banner and plots (issue 5)."""

from __future__ import annotations

import re
from html.parser import HTMLParser

import pytest
from report_samples import HOSTILE_SERIAL, make_record, save_npz, tone_capture

from benchgate.judge.rules import Verdict
from benchgate.report import plots, write_reports
from benchgate.report.html import SAFETY, render_html
from benchgate.report.layout import ReportLayout
from benchgate.units.format import format_quantity


class _Tags(HTMLParser):
    def __init__(self):
        super().__init__()
        self.tags: list[str] = []
        self.urls: list[str] = []
        self.svgs: list[dict] = []

    def handle_starttag(self, tag, attrs):
        self.tags.append(tag)
        a = dict(attrs)
        for key in ("src", "href", "xlink:href", "action", "data", "poster"):
            if key in a:
                self.urls.append(a[key])
        if tag == "svg":
            self.svgs.append(a)


def _parse(html: str) -> _Tags:
    p = _Tags()
    p.feed(html)
    p.close()
    return p


@pytest.fixture(scope="module")
def capture():
    return tone_capture()


@pytest.fixture
def written(tmp_path, capture):
    layout = ReportLayout(tmp_path, "tb3", HOSTILE_SERIAL, "2026-12-01T10:00:00Z")
    layout.ensure()
    cap_path = layout.capture_path("capture-tone")
    sha = save_npz(capture, cap_path)
    rec = make_record(HOSTILE_SERIAL, capture_file=layout.relative(cap_path), sha256=sha)
    paths = write_reports(rec, layout, {"capture-tone": capture})
    return rec, paths


def test_write_reports_gives_json_and_html_named_by_verdict(written):
    rec, paths = written
    assert set(paths) == {"json", "html"}
    assert paths["html"].name == "20261201T100000.000Z-pass.html"
    assert paths["json"].with_suffix(".html") == paths["html"]
    assert paths["html"].parent.parent.name == "tb3"


def test_no_external_url_and_no_script(written):
    html = written[1]["html"].read_text(encoding="utf-8")
    low = html.lower()
    # the rule: one self-contained file, nothing fetched from anywhere
    for bad in ("http:", "https:", "ftp:", "<script", "@import", "@font-face", "url(", "<link", "<iframe"):
        assert bad not in low, bad
    parsed = _parse(html)
    assert not [u for u in parsed.urls if not u.startswith("#")], parsed.urls
    assert not {"script", "link", "img", "iframe", "object", "embed"} & set(parsed.tags)
    assert 'src="//' not in low and 'href="//' not in low


def test_user_and_instrument_text_is_escaped(written):
    html = written[1]["html"].read_text(encoding="utf-8")
    assert "&lt;script&gt;alert(&#x27;x&#x27;)&lt;/script&gt; &quot;TB3&quot; &amp; ../../x" in html
    assert "Wren &lt;o&#x27;neil&gt;" in html
    assert "yes &lt;b&gt;bold&lt;/b&gt;" in html
    assert "Capture the tone &lt;out&gt;" in html
    assert "re-seated the board &lt;clip&gt; &amp; probe" in html
    assert "<b>bold" not in html and "<clip>" not in html


def test_banner_identity_and_safety_footer(written):
    rec, paths = written
    html = paths["html"].read_text(encoding="utf-8")
    assert 'class="banner"' in html and '<span class="vword">PASS</span>' in html
    assert "Unit passed every check" in html
    assert rec.plan_hash in html and "OWL,PSU-30,7,2.1" in html and "expired" in html
    assert "--allow-expired-calibration" in html
    assert "Acknowledged: typed by operator" in html
    assert SAFETY in html
    assert "Reanalysis" not in html


def test_plots_are_present_and_drawn(written):
    html = written[1]["html"].read_text(encoding="utf-8")
    svgs = _parse(html).svgs
    labels = [s.get("aria-label", "") for s in svgs]
    for kind in ("waveform", "envelope", "spectrum"):
        assert any(label.startswith(kind) for label in labels), labels
    assert sum("against its window" in label for label in labels) == 5  # one bar per check
    assert html.count("<polyline") >= 2 and "<polygon" in html  # traces, envelope band
    assert "start-up" in html and "f₀" in html
    assert "could not draw" not in html


def test_figures_without_checks_take_fundamental_and_startup_from_the_analysis(capture):
    from benchgate.analysis import analyze

    figures, notes = plots.capture_figures(capture, [])
    assert [f.kind for f in figures] == ["waveform", "envelope", "spectrum"]
    spectrum = figures[2].svg
    # the synthetic tone is 955 Hz (report_samples.F0): the f0 label names it
    assert "f₀ 955.0 Hz" in spectrum
    assert spectrum.count("<path d=") >= 2  # 2nd and 3rd harmonic markers at least
    a = analyze(capture, ("startup_time",))
    m = a.measurements["startup_time"]
    assert m.valid and f"start-up {format_quantity(m.value, 's')}" in figures[1].svg


def test_fail_and_reanalysis(tmp_path, capture):
    rec = make_record("TB3-0099", fail=True, reanalysis=True)
    assert rec.verdict is Verdict.FAIL
    html = render_html(rec, {"capture-tone": capture})
    assert '<span class="vword">FAIL</span>' in html and "Unit failed" in html
    assert "above 1.030 kHz" in html
    assert "Reanalysis" in html and "20261130T090000.000Z-fail.json" in html and "run-0001" in html


def test_missing_and_changed_captures_are_noted(tmp_path, capture):
    rec = make_record(capture_file="gone.npz")
    html = render_html(rec, {}, verify=tmp_path)
    assert "capture file gone.npz is not beside the report" in html
    assert "capture not available: plots not drawn" in html
    save_npz(capture, tmp_path / "gone.npz")
    html = render_html(rec, {"capture-tone": capture}, verify=tmp_path)
    assert "has changed since the run (SHA-256 differs)" in html


def test_control_characters_are_shown_not_passed_through():
    html = render_html(make_record("esc\x1b[31m\x00end"), {})
    assert "\x1b" not in html and "\x00" not in html
    assert "esc\\x1b[31m\\x00end" in html


def test_empty_serial_is_stated():
    assert "(empty serial number)" in render_html(make_record(""), {})


def test_hostile_channel_name_is_escaped_inside_svg(capture):
    rec = make_record()
    rec.steps[1].capture.channel = '"><svg onload=x>'  # the figures are labelled with the record's channel
    evil = capture.__class__(capture.samples, capture.sample_rate, channel='"><svg onload=x>', adc=capture.adc)
    html = render_html(rec, {"capture-tone": evil})
    assert "onload=x>" not in html and "&quot;&gt;&lt;svg onload=x&gt;" in html


def test_limit_derivations_listed_once_below_the_table():
    html = render_html(make_record(), {})
    assert "How the limits were derived" in html
    assert html.count("amplifier gain needed") == 1 and "details: derivation 1 below" in html
    assert "rc_ladder highpass 3 sections: worst case" in html


def test_flat_record_is_drawn_flat(capture):
    flat = tone_capture(amplitude=0.0)
    figures, _ = plots.capture_figures(flat, [])
    wave = figures[0].svg
    ticks = [float(t.replace("−", "-")) for t in
             re.findall(r'text-anchor="end">([−0-9.]+)</text>', wave)]
    # the voltage axis spans at least a tenth of the 3.3 V converter range, not one LSB of noise
    assert max(ticks) - min(ticks) >= 0.2
    assert "no fundamental found" in figures[2].caption or "largest bin" in figures[2].svg


# --- issue 9: reanalysis names, engineering derivations, unframed captures, cautions ---


def test_reanalysis_reports_are_named_and_headlined_as_such(tmp_path, capture):
    rec = make_record("TB3-0099", fail=True, reanalysis=True)
    layout = ReportLayout(tmp_path, "tb3", "TB3-0099", "2026-12-02T08:00:00Z")
    paths = write_reports(rec, layout, {"capture-tone": capture})
    for ext in ("json", "html"):
        # the plan version judged against is in the name, before the verdict
        assert paths[ext].name == f"20261202T080000.000Z-reanalysis-v3-fail.{ext}"
    html = paths["html"].read_text(encoding="utf-8")
    banner = html[html.index('<header class="banner"'):html.index("</header>")]
    assert "Reanalysis — not a test run" in banner and "Reanalysis without hardware" in banner
    assert "<title>REANALYSIS · FAIL" in html
    assert "<span>Re-judged</span>" in banner and "<span>Tested</span>" not in banner
    # an ordinary run keeps the plain name and no reanalysis mark
    plain = write_reports(make_record("TB3-0098"), ReportLayout(tmp_path, "tb3", "TB3-0098",
                                                                "2026-12-02T08:00:00Z"), {})
    assert plain["json"].name == "20261202T080000.000Z-pass.json"
    assert "Reanalysis" not in plain["html"].read_text(encoding="utf-8")


def _derived_record():
    from benchgate.analysis.measurement import Measurement
    from benchgate.judge.rules import judge
    from benchgate.plan.limits import Window
    from benchgate.record import CheckRecord

    rec = make_record()
    details = {  # the shape benchgate.plan.derive writes (values invented, TB-3 demo board)
        "topology": "rc_ladder",
        "parts": {"C1": {"nominal": 1e-08, "unit": "F", "tolerance": "±10 %"},
                  "R1": {"nominal": 6800.0, "unit": "Ω", "tolerance": "±5 %"}},
        "worst_case": [813.41284, 1101.9374],
        "gain_needed": {"nominal": 34.1145, "worst": 37.5285},
        "monte_carlo": {"draws": 20000, "seed": 3, "distribution": "uniform", "mean": 942.9157,
                        "p0_135": 850.7327, "p99_865": 1048.1653, "yield": 0.9987, "yield_u": None},
        "widened_by_mc": False,
    }
    w = Window("Hz", 789.0, 1135.0, 940.7, "rc_ladder highpass 3 sections: worst case", details=details)
    m = Measurement("frequency", 951.2, "Hz", 0.4)
    v = judge(m, w, "simple")
    rec.steps[1].checks[0] = CheckRecord("capture-tone", "frequency", w, m, v.verdict, v.reason, v.rule)
    return rec


def test_derivation_box_shows_engineering_values():
    html = render_html(_derived_record(), {})
    box = html[html.index('<section id="derivations">'):]
    box = box[:box.index("</section>")]
    assert "10 nF ±10 %" in box and "6.8 kΩ ±5 %" in box
    assert "813.4 Hz … 1.102 kHz" in box
    assert "99.865th percentile" in box and "1.048 kHz" in box and "99.87 %" in box
    for raw in ("1e-08", "unit F", "p99_865", "p0_135", "False", "None", "6800.0", "widened_by_mc"):
        assert raw not in box, raw
    assert "widened by the Monte Carlo spread" in box and "<dd>no</dd>" in box


def test_run_conditions_read_as_words_not_python():
    html = render_html(make_record(), {})
    assert "allow expired calibration: yes" in html and "unattended: no" in html
    assert "= True" not in html and "= False" not in html


@pytest.mark.parametrize("meta", [{"framing": "lines"},
                                  {"instrument": {"role": "adc", "kind": "serial-adc", "protocol": "lines"}}])
def test_a_capture_taken_without_framing_is_marked(capture, meta):
    rec = make_record()
    html = render_html(rec, {"capture-tone": capture.with_metadata(**meta)})
    top = html[:html.index('<section id="identity">')]
    assert 'id="unframed"' in top and "Captured without framing" in top and "Capture the tone" in top
    step = html[html.index('<section id="steps">'):]
    assert "Captured without framing (serial lines mode)" in step
    # the metadata itself is shown, whatever keys the driver wrote
    assert "Capture conditions" in step and ("framing" in step or "protocol lines" in step)


def test_a_framed_capture_is_not_marked(capture):
    html = render_html(make_record(), {"capture-tone": capture.with_metadata(
        instrument={"role": "adc", "protocol": "framed"}, loss={"lost_samples": 0, "end_frame": True})})
    assert "Captured without framing" not in html and 'id="unframed"' not in html
    assert "lost samples 0" in html and "end frame yes" in html


def test_general_cautions_and_plan_cautions_in_the_safety_section():
    html = render_html(make_record(), {})
    safety = html[html.index('<section id="safety">'):]
    safety = safety[:safety.index("</section>")]
    # the plan's own cautions and the bench cautions of the README's safety section
    assert "Low voltage only: 9 V board supply" in safety and "Fixture clip &lt;J3&gt;" in safety
    for words in ("current limit", "emergency stop", "isolation transformer", "ESD-safe workstation",
                  "charged after power-off"):
        assert words in safety, words


# --- issue 10: evidence computed once (views from the run's analysis, digests from the writer) ---


def _with_views(tmp_path, capture):
    from benchgate.analysis import analyze

    layout = ReportLayout(tmp_path, "tb3", "TB3-0100", "2026-12-01T10:00:00Z")
    layout.ensure()
    cap_path = layout.capture_path("capture-tone")
    sha = save_npz(capture, cap_path)
    rec = make_record("TB3-0100", capture_file=layout.relative(cap_path), sha256=sha)
    analysis = analyze(capture, ["frequency", "amplitude", "thd", "startup_time"], views=True)
    rec.steps[1].capture.views = analysis.views
    rec.steps[1].capture.metadata = dict(capture.metadata)
    return rec, layout, cap_path


def test_reports_draw_the_runs_views_without_analysing_again(tmp_path, capture, monkeypatch):
    rec, layout, _ = _with_views(tmp_path, capture)

    def no_second_analysis(*args, **kwargs):
        raise AssertionError("the report analyzed the capture again")

    import benchgate.analysis
    import benchgate.analysis.core

    monkeypatch.setattr(benchgate.analysis, "analyze", no_second_analysis)
    monkeypatch.setattr(benchgate.analysis.core, "analyze", no_second_analysis)
    monkeypatch.setattr(plots, "views_of", no_second_analysis)
    html = write_reports(rec, layout, {})["html"].read_text(encoding="utf-8")  # no capture given at all
    for kind in ("waveform", "envelope", "spectrum"):
        assert f'aria-label="{kind}, channel out"' in html
    assert "could not draw" not in html and "plots not drawn" not in html
    assert html.count("<polyline") >= 2 and "f₀ 955.0 Hz" in html


def test_views_survive_the_json_report(tmp_path, capture):
    from benchgate.report.json_report import read_json

    rec, layout, _ = _with_views(tmp_path, capture)
    paths = write_reports(rec, layout, {})
    back = read_json(paths["json"]).steps[1].capture
    v = rec.steps[1].capture.views
    assert back.views is not None and back.views.fundamental == pytest.approx(v.fundamental)
    assert back.views.spectrum_db.size == v.spectrum_db.size and back.views.cycles_v.size == v.cycles_v.size
    assert back.metadata == {"source": "synthetic"}
    again = render_html(read_json(paths["json"]), {})
    assert 'aria-label="spectrum, channel out"' in again and "plots not drawn" not in again


def test_a_fresh_report_trusts_the_writers_digest(tmp_path, capture):
    # the runner's writer returned the SHA-256 as it saved the file; writing the report does
    # not read the file back (a stored report re-rendered later does check it)
    rec, layout, cap_path = _with_views(tmp_path, capture)
    cap_path.unlink()
    html = write_reports(rec, layout, {})["html"].read_text(encoding="utf-8")
    assert "not beside the report" not in html and rec.steps[1].capture.sha256 in html
    checked = render_html(rec, {}, verify=layout.folder)
    assert "capture file " in checked and "is not beside the report" in checked
