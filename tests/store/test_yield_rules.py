"""Units, attempts, yields and Cpk inputs as docs/results.md defines them (issue 9 regressions).

The definitions are common practice with no published source; the Cpk formula is ISO 22514-2
(from memory). Each test builds histories the way the runner records them (synthetic_runs).
"""

from __future__ import annotations

import statistics
import uuid
from datetime import timedelta

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from benchgate.judge.rules import Verdict
from benchgate.store import ResultsDB
from benchgate.store.outcome import cut_short, is_complete
from benchgate.store.queries import cpk
from synthetic_runs import EPOCH, CheckSpec, make_record

WINDOW = ("capture-tone", "frequency", "Hz", 900.0, 1000.0)


def _rec(serial, minute, value, *, kind="run", lot="L1"):
    """One attempt. ``kind``: run (judged from ``value``), check-error (an untrusted value),
    aborted, station error, unfinished."""
    step, meas, unit, low, high = WINDOW
    spec = CheckSpec(step, meas, None if kind == "check-error" else value, unit, low, high,
                     reason="no steady tone found" if kind == "check-error" else None)
    cut = kind if kind in ("aborted", "station error") else None
    return make_record(serial, [spec], started=EPOCH + timedelta(minutes=minute), lot=lot,
                       cut=cut, finished=kind != "unfinished")


def _store(db, rec):
    db.begin_run(rec)
    if rec.ended is not None:
        db.finish_run(rec, None)


@pytest.fixture
def db(target):  # each test on both back ends (conftest.py)
    with ResultsDB.open(target) as d:
        yield d


class TestCutShort:
    def test_read_from_the_record(self):
        assert cut_short(_rec("A", 0, 950.0)) is None
        assert cut_short(_rec("A", 0, 950.0, kind="check-error")) is None  # the unit's own result
        assert cut_short(_rec("A", 0, 950.0, kind="aborted")) == "aborted"
        assert cut_short(_rec("A", 0, 950.0, kind="station error")) == "station error"
        # an error verdict that no check explains (the bench could not be opened)
        rec = make_record("A", [], verdict=Verdict.ERROR, reason="adc: port busy")
        assert cut_short(rec) == "station error"

    def test_fail_then_cut_still_decides(self):
        rec = _rec("A", 0, 1100.0, kind="aborted")
        assert rec.verdict == Verdict.FAIL and cut_short(rec) == "aborted"
        assert is_complete(True, "aborted", "fail")
        assert not is_complete(True, "aborted", "aborted") and not is_complete(False, None, None)


def test_aborted_and_station_error_runs_are_not_units_tested(db):
    _store(db, _rec("S1", 0, 950.0, kind="station error"))        # only a station error
    _store(db, _rec("S2", 1, 950.0, kind="aborted"))              # only a Ctrl-C
    _store(db, _rec("S3", 2, 950.0, kind="aborted"))              # Ctrl-C, then a pass
    _store(db, _rec("S3", 3, 955.0))
    _store(db, _rec("S4", 4, 960.0))                              # a plain pass
    _store(db, _rec("S5", 5, 950.0, kind="unfinished"))           # crashed, never finished
    s = db.summary()
    assert s.units_tested == 2 and s.units_untested == 3           # S3, S4 tested
    assert s.runs == 6 and s.cut_short == 3 and s.incomplete == 1
    assert (s.first_pass, s.final_pass, s.retests) == (2, 2, 0)    # S3's first complete run passed
    kinds = {r.reason: r.kind for r in s.pareto_reasons}
    assert kinds["psu: no answer within 2 s"] == "error"          # still listed as a failure event


def test_rerun_lot_final_yield_not_below_first_pass_yield(db):
    serials = [f"R{i}" for i in range(10)]
    for i, sn in enumerate(serials):                               # first pass: all pass
        _store(db, _rec(sn, i, 950.0 + i))
    # the same lot again: three runs hit a station error, one is aborted, one now fails
    for i, sn in enumerate(serials):
        kind = {0: "station error", 1: "station error", 2: "station error", 3: "aborted"}.get(i, "run")
        _store(db, _rec(sn, 100 + i, 1100.0 if i == 9 else 951.0, kind=kind))
    s = db.summary(lot="L1")
    assert s.units_tested == 10
    assert s.final_yield >= s.first_pass_yield
    assert s.final_pass == 9 and s.first_pass == 9                 # R9 failed its latest run


def test_cpk_inputs_are_each_units_latest_complete_run(db):
    _store(db, _rec("C1", 0, 1100.0))                             # fail, reworked, passes:
    _store(db, _rec("C1", 1, 960.0))                              #   960 counts, 1100 does not
    _store(db, _rec("C2", 2, 940.0))
    _store(db, _rec("C2", 3, 990.0, kind="station error"))        # cut short: value not used
    _store(db, _rec("C3", 4, 1010.0, kind="aborted"))             # fail then Ctrl-C: decided,
    _store(db, _rec("C4", 5, 950.0, kind="aborted"))              # aborted only: not a unit
    _store(db, _rec("C5", 6, 950.0, kind="check-error"))          # complete, no valid value
    _store(db, _rec("C5", 7, 955.0, kind="unfinished"))
    (c,) = db.summary().checks
    expected = [960.0, 940.0, 1010.0]                              # C1, C2, C3 (C5 invalid)
    assert c.n == 3 and c.mean == pytest.approx(statistics.mean(expected))
    assert c.std == pytest.approx(statistics.stdev(expected))     # stdlib reference, n - 1
    assert (c.min, c.max) == (940.0, 1010.0)
    # ISO 22514-2 (from memory): Cpk = min(USL - mu, mu - LSL) / 3 sigma
    mu, sd = statistics.mean(expected), statistics.stdev(expected)
    assert c.cpk == pytest.approx(min(1000.0 - mu, mu - 900.0) / (3 * sd))
    assert sum(c.histogram.counts) == 3


# ----------------------------------------------------------------- the rules, by a model

KINDS = ("pass", "fail", "check-error", "aborted", "station error", "unfinished", "fail-aborted")


def _attempt(serial, minute, kind, lot):
    value = {"pass": 950.0, "fail": 1100.0, "fail-aborted": 1100.0}.get(kind, 951.0 + minute)
    k = {"pass": "run", "fail": "run", "fail-aborted": "aborted"}.get(kind, kind)
    return _rec(serial, minute, value, kind=k, lot=lot)


def _model(histories):
    """The definitions of docs/results.md in plain Python, over records."""
    tested = first = final = retests = 0
    values = []
    for recs in histories.values():
        done = [r for r in recs if is_complete(r.ended is not None, cut_short(r), r.verdict.value)]
        if not done:
            continue
        tested += 1
        first += all(r.verdict == Verdict.PASS for r in done)
        final += done[-1].verdict == Verdict.PASS
        retests += len(done) - 1
        m = done[-1].checks()[0].result
        if m.valid:
            values.append(m.value)
    return tested, first, final, retests, values


@settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(units=st.lists(st.lists(st.sampled_from(KINDS), min_size=1, max_size=4), min_size=1, max_size=6))
def test_summary_follows_the_definitions(db, units):
    histories, minute = {}, 0
    lot = uuid.uuid4().hex  # one database for all examples: each example is its own lot
    for u, kinds in enumerate(units):
        for kind in kinds:
            rec = _attempt(f"U{u}", minute, kind, lot)
            minute += 1
            histories.setdefault(u, []).append(rec)
            _store(db, rec)
    s = db.summary(lot=lot)
    tested, first, final, retests, values = _model(histories)
    assert (s.units_tested, s.first_pass, s.final_pass, s.retests) == (tested, first, final, retests)
    assert s.units_tested + s.units_untested == len(units)
    assert s.runs == sum(len(k) for k in units)
    assert s.first_pass <= s.final_pass                            # FPY never above final yield
    if values:
        (c,) = s.checks
        assert c.n == len(values) and c.mean == pytest.approx(statistics.mean(values))
    else:
        assert s.checks == ()
    if len(values) >= 2 and statistics.stdev(values) > 0:
        sd = statistics.stdev(values)
        assert s.checks[0].cpk == pytest.approx(cpk(statistics.mean(values), sd, 900.0, 1000.0),
                                                rel=1e-6)
