"""The lot summary's expected number of false passes: the sum of the passed units' risks."""

from __future__ import annotations

import pytest
from scipy.stats import norm

from benchgate.judge import judge
from benchgate.report.summary_html import render_summary_html
from benchgate.store.db import ResultsDB
from benchgate.store.queries import summary
from synthetic_runs import EPOCH, CheckSpec, make_record


def _judged(serial, specs, **kw):
    rec = make_record(serial, specs, **kw)
    for c in rec.checks():
        cv = judge(c.result, c.window, "simple")
        c.verdict, c.reason = cv.verdict, cv.reason
        c.risk = None if cv.risk is None else cv.risk.probability
    return rec


def test_sum_over_latest_passing_runs(tmp_path):
    db = ResultsDB.open(tmp_path / "r.sqlite")
    try:
        # A passes with frequency 999 ± 1 Hz under simple acceptance: risk Φ(−2) (one limit
        # near; ILAC-G8:09/2019 4.2.2 figure), plus amplitude mid-window (negligible risk)
        db.finish_run(_judged("A", [CheckSpec("t", "frequency", 999.0, "Hz", 900.0, 1000.0, 1.0),
                                    CheckSpec("t", "amplitude", 1.0, "V", 0.6, 1.4, 0.02)]), None)
        # B passes exactly on the limit: 50 % (JCGM 106 clause 7, from memory)
        db.finish_run(_judged("B", [CheckSpec("t", "frequency", 1000.0, "Hz", 900.0, 1000.0, 1.0),
                                    CheckSpec("t", "amplitude", 1.0, "V", 0.6, 1.4)]), None)
        # C failed first (its risk does not count), then passed mid-window
        db.finish_run(_judged("C", [CheckSpec("t", "frequency", 1003.0, "Hz", 900.0, 1000.0, 1.0)]), None)
        later = EPOCH.replace(hour=9)
        db.finish_run(_judged("C", [CheckSpec("t", "frequency", 950.0, "Hz", 900.0, 1000.0, 1.0)],
                              started=later), None)
        # D fails: a fail's risk is of a false fail and never enters this sum
        db.finish_run(_judged("D", [CheckSpec("t", "frequency", 1001.0, "Hz", 900.0, 1000.0, 1.0)]), None)
        s = summary(db.connection)
    finally:
        db.close()
    # scipy.stats.norm reference: A (u = 0.5 Hz, 0.01 V), B (on the limit), C latest (u = 0.5 Hz)
    want = norm.sf(2.0) + norm.sf(198.0) + 2 * norm.sf(40.0) + 0.5 + norm.sf(200.0) + 2 * norm.sf(100.0)
    assert s.expected_false_passes == pytest.approx(want, rel=1e-9)
    assert s.risk_unstated == 1  # B's amplitude has no uncertainty
    html = render_summary_html(s)
    assert "Expected false passes" in html and f"{want:.3g}" in html
    assert "1 passed checks state no risk" in html
