"""Capability statistics per numeric check: n, mean, σ, min, max, Cpk and a histogram.

The inputs are the valid values of each unit's latest complete run in the selection
(docs/results.md), picked by SQL that :mod:`.queries` passes in. Where the work happens is the
one difference between the back ends here:

- PostgreSQL (a server, possibly far away): two aggregate queries run on the server (first n,
  mean, min, max; then bin counts and squared deviations about that mean); only a few rows per
  check travel.
- SQLite (a file in this process): the picked values are read once and binned with numpy, which
  is several times faster than SQLite sorting them for a ``GROUP BY`` twice.

Both give the same numbers (two-pass variance, bins ``floor((x − lo) / width)`` clamped to the
last bin).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np

#: histogram bins per numeric check.
HISTOGRAM_BINS = 30


@dataclass(frozen=True)
class Histogram:
    edges: tuple[float, ...]  # HISTOGRAM_BINS + 1 bin edges
    counts: tuple[int, ...]


@dataclass(frozen=True)
class CheckStats:
    """Statistics of one numeric check (one window of one step of one plan)."""

    plan_id: str
    step: str
    measurement: str
    unit: str
    low: float | None
    high: float | None
    n: int
    mean: float
    std: float | None  # sample standard deviation; None below two values
    min: float
    max: float
    cpk: float | None  # None when σ is zero or unknown
    histogram: Histogram


def cpk(mean: float, std: float | None, low: float | None, high: float | None) -> float | None:
    """Process capability index Cpk = min(USL − μ, μ − LSL) / 3σ (ISO 22514-2).

    One-sided when only one limit is given; None when σ is unknown or zero.
    """
    if std is None or not std > 0 or (low is None and high is None):
        return None
    sides = []
    if high is not None:
        sides.append(high - mean)
    if low is not None:
        sides.append(mean - low)
    return min(sides) / (3.0 * std)


def _ranges(ids, vmin, vmax, defs):
    """Histogram range per check: the data and the limits, so that both show, padded 4 %."""
    lows = np.array([np.nan if defs[i][4] is None else defs[i][4] for i in ids], dtype=float)
    highs = np.array([np.nan if defs[i][5] is None else defs[i][5] for i in ids], dtype=float)
    lo = np.fmin(vmin, lows)
    hi = np.fmax(vmax, highs)
    span = hi - lo
    pad = np.where(span > 0, 0.04 * span, np.maximum(np.abs(lo) * 1e-3, 1e-12))
    lo, hi = lo - pad, hi + pad
    return lo, hi, (hi - lo) / HISTOGRAM_BINS


def _on_server(conn, defs, pick: str, params: list[Any]):
    src = f"({pick})"
    rows = conn.execute(f"SELECT v.def, COUNT(*), AVG(v.value), MIN(v.value), MAX(v.value)"
                        f" FROM {src} v GROUP BY v.def", params).fetchall()
    if not rows:
        return None
    ids = np.array([r[0] for r in rows], dtype=np.int64)
    n = np.array([r[1] for r in rows], dtype=np.int64)
    mean = np.array([r[2] for r in rows], dtype=float)
    vmin = np.array([r[3] for r in rows], dtype=float)
    vmax = np.array([r[4] for r in rows], dtype=float)
    lo, hi, width = _ranges(ids, vmin, vmax, defs)
    # second pass, one query for all checks: bin counts and squared deviations about the mean
    # of the first pass (two-pass variance, no cancellation)
    counts = np.zeros((len(rows), HISTOGRAM_BINS), dtype=np.int64)
    ssd = np.zeros(len(rows))
    index = {int(d): k for k, d in enumerate(ids)}
    values = ", ".join(["(CAST(? AS INTEGER), CAST(? AS DOUBLE PRECISION),"
                        " CAST(? AS DOUBLE PRECISION), CAST(? AS DOUBLE PRECISION))"] * len(rows))
    vparams: list[Any] = []
    for k in range(len(rows)):
        vparams += [int(ids[k]), float(lo[k]), float(width[k]), float(mean[k])]
    sql = (f"WITH p (def, lo, width, mu) AS (VALUES {values})"
           f" SELECT v.def, {conn.floor_int('(v.value - p.lo) / p.width')} AS b, COUNT(*),"
           f" SUM((v.value - p.mu) * (v.value - p.mu)) FROM {src} v JOIN p ON p.def = v.def"
           " GROUP BY v.def, b")
    for d, b, cnt, s in conn.execute(sql, vparams + params):
        k = index[int(d)]
        counts[k, min(max(int(b), 0), HISTOGRAM_BINS - 1)] += cnt
        ssd[k] += s
    return ids, n, mean, vmin, vmax, lo, hi, counts, ssd


def _in_process(conn, defs, pick: str, params: list[Any]):
    rows = conn.execute(pick, params).fetchall()
    if not rows:
        return None
    data = np.array(rows, dtype=float).reshape(-1, 2)
    d, v = data[:, 0].astype(np.int64), data[:, 1]
    order = np.argsort(d, kind="stable")
    d, v = d[order], v[order]
    ids, start, n = np.unique(d, return_index=True, return_counts=True)
    mean = np.add.reduceat(v, start) / n
    vmin, vmax = np.minimum.reduceat(v, start), np.maximum.reduceat(v, start)
    lo, hi, width = _ranges(ids, vmin, vmax, defs)
    k = np.repeat(np.arange(len(ids)), n)
    b = np.clip(np.floor((v - lo[k]) / width[k]), 0, HISTOGRAM_BINS - 1).astype(np.int64)
    counts = np.bincount(k * HISTOGRAM_BINS + b,
                         minlength=len(ids) * HISTOGRAM_BINS).reshape(len(ids), HISTOGRAM_BINS)
    ssd = np.add.reduceat((v - mean[k]) ** 2, start)
    return ids, n, mean, vmin, vmax, lo, hi, counts, ssd


def check_stats(conn, defs: dict, latest_sql: str, params: list[Any]) -> tuple[CheckStats, ...]:
    """Statistics per check over the values of the runs that ``latest_sql`` (a ``WITH`` clause
    naming ``latest``, taking ``params``) picks."""
    pick = (f"{latest_sql} SELECT c.def, c.value FROM checks c"
            " WHERE c.valid = 1 AND c.value IS NOT NULL AND c.run IN (SELECT id FROM latest)")
    work = _in_process if conn.dialect == "sqlite" else _on_server
    got = work(conn, defs, pick, params)
    if got is None:
        return ()
    ids, n, mean, vmin, vmax, lo, hi, counts, ssd = got
    std = np.sqrt(ssd / np.maximum(n - 1, 1))
    out = []
    for k, d in enumerate(ids):
        plan_id, step, meas, unit, low, high = defs[int(d)]
        s = None if n[k] < 2 else float(std[k])
        edges = tuple(float(x) for x in np.linspace(lo[k], hi[k], HISTOGRAM_BINS + 1))
        out.append(CheckStats(
            plan_id=plan_id, step=step, measurement=meas, unit=unit, low=low, high=high,
            n=int(n[k]), mean=float(mean[k]), std=s, min=float(vmin[k]), max=float(vmax[k]),
            cpk=cpk(float(mean[k]), s, low, high),
            histogram=Histogram(edges, tuple(int(x) for x in counts[k]))))
    out.sort(key=lambda c: (c.plan_id, c.step, c.measurement, c.low is None, c.low or 0.0))
    return tuple(out)
