"""Lot summary: capability, yields, retests and Pareto lists against hand computations."""

from __future__ import annotations

import json
import math
import statistics
from datetime import timedelta

import numpy as np
import pytest

from benchgate.errors import StoreError
from benchgate.judge.rules import Verdict
from benchgate.store import ResultsDB
from benchgate.store.queries import HISTOGRAM_BINS, cpk
from synthetic_runs import EPOCH, CheckSpec, make_record

# a fixed data set: mean 10.0, sample standard deviation 0.2 (hand computation:
# deviations ±0.2, ±0.1, 0, ±0.3, 0 -> sum of squares 0.28, / (n - 1 = 7) = 0.04)
DATA = [9.8, 10.1, 10.0, 10.3, 9.9, 10.2, 10.0, 9.7]


@pytest.fixture
def db(target):  # each test on both back ends (conftest.py)
    with ResultsDB.open(target) as d:
        yield d


def _put(db, serial, minutes, verdict=None, *, specs=None, lot="L1", plan="tb3", finished=True,
         reason=None):
    specs = specs if specs is not None else [CheckSpec("capture-tone", "frequency", 955.0, "Hz", 860.0, 1050.0)]
    rec = make_record(serial, specs, started=EPOCH + timedelta(minutes=minutes), verdict=verdict,
                      lot=lot, plan_id=plan, finished=finished, reason=reason)
    db.begin_run(rec)
    if finished:
        db.finish_run(rec, None)
    return rec


class TestCpk:
    def test_formula_two_sided(self):
        # ISO 22514-2: Cpk = min(USL - mu, mu - LSL) / 3 sigma; hand: min(1.5, 1.0) / 0.6
        assert cpk(10.0, 0.2, 9.0, 11.5) == pytest.approx(1.0 / 0.6)

    def test_formula_one_sided(self):
        # ISO 22514-2, one-sided indices CpkU = (USL - mu) / 3 sigma, CpkL = (mu - LSL) / 3 sigma
        assert cpk(10.0, 0.2, None, 10.9) == pytest.approx(0.9 / 0.6)
        assert cpk(10.0, 0.2, 9.4, None) == pytest.approx(0.6 / 0.6)

    def test_undefined(self):
        assert cpk(10.0, 0.0, 9.0, 11.0) is None
        assert cpk(10.0, None, 9.0, 11.0) is None

    def test_mean_outside_gives_negative(self):
        # ISO 22514-2 formula: a mean beyond a limit gives Cpk < 0
        assert cpk(12.0, 0.5, 9.0, 11.0) == pytest.approx(-1.0 / 1.5)

    @pytest.mark.parametrize(("low", "high", "expected"), [
        (9.0, 11.5, 1.0 / 0.6),   # ISO 22514-2, hand computation above
        (None, 10.9, 0.9 / 0.6),  # one-sided, upper limit only
        (9.4, None, 0.6 / 0.6),   # one-sided, lower limit only
    ])
    def test_through_the_database(self, db, low, high, expected):
        for i, x in enumerate(DATA):
            _put(db, f"U{i}", i, specs=[CheckSpec("s1", "amplitude", x, "V", low, high)])
        (c,) = db.summary().checks
        assert c.n == len(DATA)
        assert c.mean == pytest.approx(10.0)
        assert c.std == pytest.approx(0.2)  # hand computation
        assert c.std == pytest.approx(statistics.stdev(DATA))  # stdlib reference, n - 1
        assert (c.min, c.max) == (9.7, 10.3)
        assert c.cpk == pytest.approx(expected)

    def test_large_offset_values_keep_precision(self, db):
        # two-pass variance: values near 1e6 with spread 0.01 (a naive sum of squares loses it)
        vals = 1e6 + np.array(DATA) / 20
        for i, x in enumerate(vals):
            _put(db, f"U{i}", i, specs=[CheckSpec("s1", "frequency", float(x), "Hz", 1e6, 1e6 + 1)])
        (c,) = db.summary().checks
        assert c.std == pytest.approx(np.std(vals, ddof=1), rel=1e-6)  # numpy reference

    def test_single_value_has_no_sigma(self, db):
        _put(db, "U1", 0)
        (c,) = db.summary().checks
        assert c.n == 1 and c.std is None and c.cpk is None

    def test_invalid_values_are_left_out(self, db):
        _put(db, "U1", 0, specs=[CheckSpec("s1", "frequency", 950.0, "Hz", 900.0, 1000.0)])
        _put(db, "U2", 1, specs=[CheckSpec("s1", "frequency", None, "Hz", 900.0, 1000.0, reason="no tone")])
        (c,) = db.summary().checks
        assert c.n == 1


def _crafted_history(db):
    # unit: attempts in time order (minutes) -> verdicts
    _put(db, "A", 0, Verdict.PASS)                                       # pass first time
    _put(db, "B", 10, Verdict.PASS)                                      # inserted first but later:
    _put(db, "B", 5, Verdict.FAIL)                                       #   fail, then pass
    _put(db, "C", 1, Verdict.FAIL)
    _put(db, "C", 11, Verdict.FAIL)                                      # fails twice
    _put(db, "D", 2, Verdict.ERROR)                                      # station error (no check
    _put(db, "D", 12, Verdict.FAIL)                                      #   explains it): cut short
    _put(db, "D", 22, Verdict.PASS)                                      # error, fail, pass
    _put(db, "E", 3, finished=False)                                     # crashed, incomplete
    _put(db, "F", 4, Verdict.PASS)
    _put(db, "F", 14, Verdict.PASS)                                      # passed, tested again


def test_yields_and_retests(db):
    _crafted_history(db)
    s = db.summary()
    # definitions of docs/results.md (common practice, no published source): units tested have a
    # complete run; E (never finished) is an attempt only, D's station error is cut short
    assert s.units_tested == 5 and s.units_untested == 1 and s.runs == 11
    assert s.first_pass == 2 and s.first_pass_yield == pytest.approx(2 / 5)   # A, F
    assert s.final_pass == 4 and s.final_yield == pytest.approx(4 / 5)        # A, B, D, F
    assert s.retests == 4                  # complete runs after the first: B, C, D (fail, pass), F
    assert s.units_retested == 4                                              # B, C, D, F
    assert s.incomplete == 1 and s.cut_short == 1
    assert s.verdicts == {"pass": 5, "fail": 4, "error": 1, "incomplete": 1}


def test_filters(db):
    _crafted_history(db)
    _put(db, "G", 30, Verdict.FAIL, lot="L2")
    _put(db, "G", 31, Verdict.PASS, lot="L2", plan="wo1")
    assert db.summary(lot="L2").units_tested == 2  # G on tb3 and G on wo1 are two units
    s = db.summary(plan="wo1")
    assert (s.units_tested, s.first_pass) == (1, 1)
    s = db.summary(plan="tb3", lot="L2")
    assert (s.units_tested, s.first_pass, s.final_pass) == (1, 0, 0)
    since = (EPOCH + timedelta(minutes=10)).strftime("%Y-%m-%dT%H:%M")
    s = db.summary(since=since)
    # runs from minute 10: B(pass), C(fail), D(fail, pass), F(pass), G x2
    assert s.runs == 7 and s.units_tested == 6
    assert s.first_pass == 3  # B, F and G on wo1
    assert db.summary(since="2099-01-01").units_tested == 0
    with pytest.raises(StoreError, match="--since"):
        db.summary(since="last tuesday")


def test_pareto_ordering(db):
    f = ("capture-tone", "frequency", "Hz", 860.0, 1050.0)
    a = ("capture-tone", "amplitude", "V", 0.6, 1.4)
    t = ("capture-tone", "thd", "%", None, 5.0)

    def specs(fv, av, tv, areason=None):
        return [CheckSpec(f[0], f[1], fv, f[2], f[3], f[4]),
                CheckSpec(a[0], a[1], av, a[2], a[3], a[4], reason=areason),
                CheckSpec(t[0], t[1], tv, t[2], t[3], t[4])]

    _put(db, "P1", 0, specs=specs(1100.0, 1.0, 2.0))        # frequency above
    _put(db, "P2", 1, specs=specs(1200.0, 1.0, 2.0))        # frequency above
    _put(db, "P3", 2, specs=specs(800.0, 1.0, 9.0))         # frequency below, thd above
    _put(db, "P4", 3, specs=specs(950.0, None, 2.0, "no steady tone found"))  # amplitude error
    _put(db, "P5", 4, specs=specs(950.0, None, 2.0, "no steady tone found"))
    _put(db, "P6", 5, specs=specs(950.0, 1.0, 2.0))         # good
    _put(db, "P7", 6, specs=[], verdict=Verdict.ERROR, reason="adc: no data for 1 s")
    s = db.summary()
    order = [(p.measurement, p.fail, p.error, p.total) for p in s.pareto_checks]
    assert order == [("frequency", 3, 0, 3), ("amplitude", 0, 2, 2), ("thd", 1, 0, 1)]
    reasons = [(r.reason, r.count) for r in s.pareto_reasons]
    assert reasons == [
        ("frequency above the high limit", 2),
        ("no steady tone found", 2),
        ("adc: no data for 1 s", 1),
        ("frequency below the low limit", 1),
        ("thd above the high limit", 1),
    ]
    kinds = {r.reason: r.kind for r in s.pareto_reasons}
    assert kinds["no steady tone found"] == "error" and kinds["adc: no data for 1 s"] == "error"
    assert kinds["frequency above the high limit"] == "fail"
    counts = [r.count for r in s.pareto_reasons]
    assert counts == sorted(counts, reverse=True)


def test_incomplete_run_in_reason_pareto(db):
    _put(db, "X", 0, finished=False)
    assert [(r.reason, r.count) for r in db.summary().pareto_reasons] == [("incomplete: run did not finish", 1)]


def test_histogram_covers_data_and_limits(db):
    for i, x in enumerate(DATA):
        _put(db, f"U{i}", i, specs=[CheckSpec("s1", "amplitude", x, "V", 9.0, 11.5)])
    (c,) = db.summary().checks
    h = c.histogram
    assert len(h.counts) == HISTOGRAM_BINS and len(h.edges) == HISTOGRAM_BINS + 1
    assert sum(h.counts) == len(DATA)
    assert h.edges[0] < 9.0 and h.edges[-1] > 11.5
    ref, _ = np.histogram(DATA, bins=np.array(h.edges))  # numpy reference binning
    assert list(h.counts) == list(ref)


def test_empty_database(db):
    s = db.summary()
    assert (s.runs, s.units_tested, s.first_pass_yield, s.final_yield, s.checks) == (0, 0, None, None, ())


def test_to_dict_is_json(db):
    _crafted_history(db)
    _put(db, "Z", 40, specs=[CheckSpec("capture-tone", "frequency", 1100.0, "Hz", 860.0, 1050.0)])
    d = db.summary().to_dict()
    text = json.dumps(d, allow_nan=False)
    back = json.loads(text)
    assert back["units_tested"] == 6 and math.isclose(back["first_pass_yield"], 2 / 6)
    assert back["checks"][0]["histogram"]["counts"]
    assert set(back["pareto_checks"][0]) >= {"step", "measurement", "fail", "error", "inconclusive", "total"}


def test_history_newest_first(db):
    _crafted_history(db)
    h = db.history("D")
    assert [r.verdict for r in h] == ["pass", "fail", "error"]
    assert [r.status for r in db.history("E")] == ["incomplete"]
    assert db.history("nobody") == []



def test_lot_summary_lists_each_unit_with_its_latest_attempt(db):
    # docs/results.md: a lot summary lists every unit with its number of attempts and its latest
    # attempt's verdict (common practice, no source); a summary with no lot lists none
    _crafted_history(db)
    assert db.summary().units == ()
    units = {u.serial: u for u in db.summary(lot="L1").units}
    assert sorted(units) == ["A", "B", "C", "D", "E", "F"]
    assert (units["B"].attempts, units["B"].verdict) == (2, "pass")   # the later attempt passed
    assert (units["C"].attempts, units["C"].verdict) == (2, "fail")
    assert (units["D"].attempts, units["D"].verdict) == (3, "pass")
    assert (units["E"].attempts, units["E"].verdict) == (1, "incomplete")
    assert all(u.plan_id == "tb3" for u in units.values())


def test_lot_unit_list_names_each_report_and_its_sha256(db, tmp_path):
    # a central user finds each unit's report by its path relative to the station's report
    # folder and verifies it by its SHA-256 (issue 12); the JSON output and the page carry both
    import hashlib

    from benchgate.report.summary_html import render_summary_html

    reports = tmp_path / "reports"
    report = reports / "tb3" / "A" / "run1.json"
    report.parent.mkdir(parents=True)
    report.write_text('{"unit": "A"}')
    db.reports_dir = reports
    rec = make_record("A", [CheckSpec("capture-tone", "frequency", 955.0, "Hz", 860.0, 1050.0)])
    db.finish_run(rec, report)
    _put(db, "B", 1)
    units = {u.serial: u for u in db.summary(lot="L1").units}
    assert units["A"].report_file == "tb3/A/run1.json"
    assert units["A"].report_sha256 == hashlib.sha256(report.read_bytes()).hexdigest()
    assert (units["B"].report_file, units["B"].report_sha256) == (None, None)
    since = db.summary(lot="L1", since=(EPOCH + timedelta(minutes=1)).strftime("%Y-%m-%dT%H:%M"))
    assert [(u.serial, u.report_file) for u in since.units] == [("B", None)]
    d = json.loads(json.dumps(db.summary(lot="L1").to_dict()))
    assert d["units"][0]["report_file"] == "tb3/A/run1.json" and d["units"][0]["report_sha256"]
    html = render_summary_html(db.summary(lot="L1"), page_dir=tmp_path / "elsewhere")
    assert "tb3/A/run1.json" in html and units["A"].report_sha256 in html
