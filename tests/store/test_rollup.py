"""The summary's kept rows (store/rollup.py) give what the definitions of docs/results.md give.

A reference computes every summary number in plain Python over all stored run and check rows
(the definitions of docs/results.md, common practice with no published source; the statistics
module is the reference for mean and σ, numpy for the histogram counts). Random histories with
retests, runs cut short, unfinished runs, units in two lots and under two plans, equal start
times, runs finished twice, and runs forwarded from a station are written through the public
paths on both back ends; every filter combination must agree with the reference. The kept rows
must also equal what :func:`~benchgate.store.rollup.rebuild` computes from scratch.
"""

from __future__ import annotations

import math
import random
import statistics
from datetime import timedelta
from itertools import product

import numpy as np
import pytest

from benchgate.judge.rules import Verdict
from benchgate.store import ResultsDB
from benchgate.store.forward import send_pending
from benchgate.store.outcome import is_complete
from benchgate.store.queries import parse_since
from benchgate.store.rollup import bin_width, rebuild
from synthetic_runs import EPOCH, CheckSpec, make_record
from waiting import run_together

KINDS = ("pass", "fail", "check-error", "aborted", "station error", "unfinished", "fail-aborted")
# a two-sided window around zero (negative values, grid edges at 0), a one-sided one, and one
# far from zero (precision of σ for large offsets)
WINDOWS = (("s1", "offset", "V", -1.0, 1.0), ("s1", "thd", "%", None, 5.0),
           ("s2", "frequency", "Hz", 1e6, 1e6 + 1.0))


def _specs(rng, kind):
    out = []
    for k, (step, meas, unit, low, high) in enumerate(WINDOWS):
        centre = {0: 0.0, 1: 2.0, 2: 1e6 + 0.5}[k]
        spread = {0: 0.3, 1: 0.8, 2: 1e-3}[k]
        x = centre + spread * rng.gauss(0, 1)
        if rng.random() < 0.1:
            x = rng.choice([0.0, 0.5, -0.25, 1e6 + 0.5, centre])  # on the grid
        if kind in ("fail", "fail-aborted") and k == 0:
            x = 1.5 + rng.random()
        if kind == "check-error" and k == 0:
            out.append(CheckSpec(step, meas, None, unit, low, high, reason="no steady tone found"))
            continue
        out.append(CheckSpec(step, meas, x, unit, low, high, 1e-3))
    return out


def _record(rng, serial, plan, lot, minute, kind):
    cut = {"aborted": "aborted", "station error": "station error", "fail-aborted": "aborted"}.get(kind)
    rec = make_record(serial, _specs(rng, kind), plan_id=plan, lot=lot,
                      started=EPOCH + timedelta(minutes=minute), cut=cut,
                      finished=kind != "unfinished")
    for c in rec.checks():
        if c.verdict == Verdict.PASS and rng.random() < 0.7:
            c.risk = rng.random() * 1e-3
    return rec


def _history(db, station, rng, n_units):
    """Random attempts; some go straight to ``db``, the others through a station's queue."""
    for _ in range(n_units * 3):
        serial = f"U{rng.randrange(n_units)}"
        plan = rng.choice(["tb3", "tb3", "wo1"])
        lot = rng.choice(["L1", "L1", "L2", None])
        minute = rng.randrange(12) * 360  # every 6 h over 3 days; equal start times happen
        rec = _record(rng, serial, plan, lot, minute, rng.choice(KINDS))
        where = station if station is not None and rng.random() < 0.4 else db
        where.begin_run(rec)
        if rec.ended is not None:
            where.finish_run(rec, None)
            if rng.random() < 0.15:  # finished again: its checks are replaced
                again = _record(rng, serial, plan, lot, minute, rng.choice(KINDS[:2]))
                again.run_id = rec.run_id
                where.finish_run(again, None)
    if station is not None:
        assert send_pending(station, db).left == 0


def _reference(db, plan, lot, since):
    runs = db.conn.execute("SELECT id, run_id, serial, plan_id, lot, started_epoch, complete,"
                           " cut_short, verdict, report_file, report_sha256 FROM runs").fetchall()
    checks = db.conn.execute("SELECT run, def, value, valid, verdict, risk FROM checks").fetchall()
    t = None if since is None else parse_since(since)
    sel = [r for r in runs if (plan is None or r[3] == plan) and (lot is None or r[4] == lot)
           and (t is None or r[5] >= t)]
    units: dict = {}
    for r in sorted(sel, key=lambda r: (r[5], r[1])):
        units.setdefault((r[3], r[2]), []).append(r)
    by_run: dict = {}
    for c in checks:
        by_run.setdefault(c[0], []).append(c)
    out = dict(units_seen=len(units), runs=len(sel), tested=0, first=0, final=0, retests=0,
               retested=0, cut=0, risk=0.0, unstated=0)
    values: dict = {}
    for rs in units.values():
        ok = [r for r in rs if is_complete(bool(r[6]), r[7], r[8])]
        out["cut"] += sum(1 for r in rs if r[6] and not is_complete(True, r[7], r[8]))
        if not ok:
            continue
        out["tested"] += 1
        out["first"] += all(r[8] == "pass" for r in ok)
        out["final"] += ok[-1][8] == "pass"
        out["retests"] += len(ok) - 1
        out["retested"] += len(ok) > 1
        for c in by_run.get(ok[-1][0], []):
            if c[3] and c[2] is not None:
                values.setdefault(c[1], []).append(c[2])
            if ok[-1][8] == "pass" and c[4] == "pass":
                out["risk"] += c[5] or 0.0
                out["unstated"] += c[5] is None
    verdicts: dict = {}
    for r in sel:
        v = r[8] if r[6] else "incomplete"
        verdicts[v] = verdicts.get(v, 0) + 1
    lines = sorted((rs[0][2], rs[0][3], (rs[-1][8] if rs[-1][6] else "incomplete"), len(rs),
                    rs[-1][9], rs[-1][10]) for rs in units.values())
    return out, values, verdicts, lines


def _check_same(db, plan, lot, since):
    s = db.summary(plan=plan, lot=lot, since=since)
    ref, values, verdicts, lines = _reference(db, plan, lot, since)
    what = f"plan={plan} lot={lot} since={since}"
    got = dict(units_seen=s.units_tested + s.units_untested, runs=s.runs, tested=s.units_tested,
               first=s.first_pass, final=s.final_pass, retests=s.retests,
               retested=s.units_retested, cut=s.cut_short, risk=s.expected_false_passes,
               unstated=s.risk_unstated)
    assert got == pytest.approx(ref, rel=1e-12, abs=1e-15), what
    assert s.first_pass <= s.final_pass
    assert s.verdicts == verdicts, what
    defs = {row[0]: row[1:] for row in db.conn.execute(
        "SELECT id, plan_id, step, measurement, low, high FROM check_defs")}
    want = {defs[d][:3] + (defs[d][3], defs[d][4]): v for d, v in values.items()}
    assert {(c.plan_id, c.step, c.measurement, c.low, c.high) for c in s.checks} == set(want), what
    for c in s.checks:
        v = want[(c.plan_id, c.step, c.measurement, c.low, c.high)]
        assert c.n == len(v) and (c.min, c.max) == (min(v), max(v)), what
        assert c.mean == pytest.approx(statistics.fmean(v), rel=1e-13, abs=1e-13), what
        if len(v) < 2:
            assert c.std is None
        else:
            assert c.std == pytest.approx(statistics.stdev(v), rel=1e-7, abs=1e-12), what
        edges = np.array(c.histogram.edges)
        assert len(edges) == 31 and edges[0] <= min(v) and edges[-1] > max(v)
        for limit in (c.low, c.high):
            assert limit is None or edges[0] <= limit <= edges[-1]
        ref_counts, _ = np.histogram(v, bins=edges)  # numpy reference binning
        assert list(c.histogram.counts) == list(ref_counts), what
        w = bin_width(c.low, c.high)
        assert all(float(e / w).is_integer() for e in edges)  # edges on the check's grid
    if lot is not None:
        assert [(u.serial, u.plan_id, u.verdict, u.attempts, u.report_file, u.report_sha256)
                for u in s.units] == lines, what
    return s


def _kept(db):
    units = sorted(tuple(r) for r in db.conn.execute("SELECT * FROM unit_state").fetchall())
    bins = sorted(tuple(r) for r in db.conn.execute("SELECT * FROM value_bins").fetchall())
    return units, bins


def assert_kept_equals_rebuilt(db):
    """The rows kept write by write equal those :func:`rebuild` computes from all rows."""
    kept = _kept(db)
    db.conn.begin_write()
    try:
        rebuild(db.conn)
        rebuilt = _kept(db)
    finally:
        db.conn.rollback()
    assert [u[:11] for u in kept[0]] == [u[:11] for u in rebuilt[0]]  # counts and run ids
    assert [u[12] for u in kept[0]] == [u[12] for u in rebuilt[0]]  # passed checks, no risk
    assert [u[11] for u in kept[0]] == pytest.approx([u[11] for u in rebuilt[0]], rel=1e-12)
    assert [b[:5] + b[7:] for b in kept[1]] == [b[:5] + b[7:] for b in rebuilt[1]]  # n, min, max
    for a, b in zip(kept[1], rebuilt[1], strict=True):  # the sums, to rounding
        assert list(a[5:7]) == pytest.approx(list(b[5:7]), rel=1e-9, abs=1e-12)


@pytest.mark.parametrize("seed", range(4))
def test_kept_rows_answer_as_the_definitions(target, tmp_path, seed):
    rng = random.Random(seed)
    with ResultsDB.open(target) as db, ResultsDB.open(tmp_path / "station.sqlite") as station:
        _history(db, station, rng, n_units=8)
        # since: before every run; a day's start (kept bins only); within a day (kept bins
        # of the days after, the rest binned from the runs); a run's exact start time
        times = (None, "2000-01-01", "2026-11-03", "2026-11-03T15:00", "2026-11-04T02:00Z")
        for plan, lot, since in product((None, "tb3", "wo1"), (None, "L1", "L2", "L9"), times):
            _check_same(db, plan, lot, since)
        # a since before every run is the summary without since (read from the kept rows)
        assert db.summary(lot="L1", since="2000-01-01").to_dict() | {"since": None} == \
            db.summary(lot="L1").to_dict()
        assert_kept_equals_rebuilt(db)


def test_concurrent_writers_of_the_same_units(pg_url):
    # six connections write retests of the same five units (and share every bin of the whole
    # scope) at once: the unit locks and ordered upserts leave the rows as a rebuild makes them
    def writer(k, start):
        rng = random.Random(100 + k)
        with ResultsDB.open(pg_url) as db:
            start.wait(timeout=30)
            for i in range(12):
                rec = _record(rng, f"C{rng.randrange(5)}", "tb3", rng.choice(["L1", "L2"]),
                              k * 12 + i, rng.choice(KINDS))
                db.begin_run(rec)
                if rec.ended is not None:
                    db.finish_run(rec, None)

    run_together(writer, 6, timeout=120)
    with ResultsDB.open(pg_url) as db:
        assert_kept_equals_rebuilt(db)
        for lot in (None, "L1", "L2"):
            _check_same(db, None, lot, None)


def test_retest_takes_out_the_extreme_value(target):
    # a unit's value was the least (largest) of its bin and of all; after its retest the least
    # (largest) is the next value in that bin, read again; an emptied bin is gone
    # (docs/results.md: one value per unit, from its latest complete run)
    spec = ("s1", "offset", "V", -1.0, 1.0)
    with ResultsDB.open(target) as db:
        # -0.9 and -0.895 share a bin, so do 0.2 and 0.195 (width 2⁻⁶ for a window 2 wide)
        for i, x in enumerate([-0.9, 0.1, 0.2, 0.195, -0.895]):
            db.finish_run(make_record(f"E{i}", [CheckSpec(*spec[:2], x, spec[2], *spec[3:])],
                                      started=EPOCH + timedelta(minutes=i)), None)
        (c,) = db.summary().checks
        assert (c.n, c.min, c.max) == (5, -0.9, 0.2)
        assert math.floor(-0.9 * 64) == math.floor(-0.895 * 64) and math.floor(0.2 * 64) == math.floor(0.195 * 64)
        db.finish_run(make_record("E0", [CheckSpec(*spec[:2], 0.15, spec[2], *spec[3:])],
                                  started=EPOCH + timedelta(minutes=9)), None)
        db.finish_run(make_record("E2", [CheckSpec(*spec[:2], 0.1, spec[2], *spec[3:])],
                                  started=EPOCH + timedelta(minutes=9)), None)
        (c,) = db.summary().checks
        values = [0.15, 0.1, 0.1, 0.195, -0.895]
        assert (c.n, c.min, c.max) == (5, -0.895, 0.195)
        assert c.mean == pytest.approx(statistics.fmean(values), rel=1e-14)
        assert c.std == pytest.approx(statistics.stdev(values), rel=1e-9)
        n_bins = db.conn.execute("SELECT COUNT(*) FROM value_bins WHERE whole = 1").fetchone()[0]
        assert n_bins == len({math.floor(x / bin_width(-1.0, 1.0)) for x in values})


def test_outlier_retested_leaves_no_trace_in_sigma(target):
    # a wild value (1e12) taken out again by a retest: σ of the rest stays exact (a single
    # running sum of squares would keep an error of about 1e24 · 2⁻⁵³ ≈ 1e8 in it)
    spec = ("s1", "offset", "V", -1.0, 1.0)
    vals = [0.01, 0.02, 0.03, 0.05]
    with ResultsDB.open(target) as db:
        for i, x in enumerate(vals):
            db.finish_run(make_record(f"O{i}", [CheckSpec(*spec[:2], x, spec[2], *spec[3:])],
                                      started=EPOCH + timedelta(minutes=i)), None)
        db.finish_run(make_record("O9", [CheckSpec(*spec[:2], 1e12, spec[2], *spec[3:])],
                                  started=EPOCH + timedelta(minutes=5)), None)
        db.finish_run(make_record("O9", [CheckSpec(*spec[:2], 0.04, spec[2], *spec[3:])],
                                  started=EPOCH + timedelta(minutes=6)), None)
        (c,) = db.summary().checks
    assert c.std == pytest.approx(statistics.stdev(vals + [0.04]), rel=1e-12)  # stdlib reference
    assert c.max == 0.05
