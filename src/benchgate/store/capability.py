"""Capability statistics per numeric check: n, mean, σ, min, max, Cpk and a histogram.

The inputs are the valid values of each unit's latest complete run in the selection
(docs/results.md). They arrive as bins of the check's fixed grid (:mod:`.rollup`): per bin
the count, the sums of deviations from the bin's centre and of their squares, the least and the
largest value. A summary over all runs or one lot reads the bins kept up to date at write time;
one with ``--since`` has the database bin the selected values (one ``GROUP BY``). Either way only
bins travel, never the values, and :func:`stats_from_bins` finishes the same way:

- mean = (Σ nᵦ·cᵦ + Σ s1ᵦ) / n, and the sum of squared deviations about it
  Σ (s2ᵦ + 2 (cᵦ − mean) s1ᵦ + nᵦ (cᵦ − mean)²), each summed exactly (``math.fsum``): no large
  sums of squares are subtracted, so σ keeps its precision for values far from zero;
- the histogram has :data:`HISTOGRAM_BINS` bars whose edges lie on the check's grid: the range
  covers the data and the limits (padded 4 %), each bar spans a whole number of grid bins, so
  every count is exact for the edges shown.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

from benchgate.store.rollup import BIN_DEVIATION_SQL

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


def _histogram(bins: list[tuple[float, int]], width: float, vmin: float, vmax: float,
               low: float | None, high: float | None) -> Histogram:
    """The bars over ``bins`` ((grid bin, count)): data and limits padded 4 %, edges on the grid."""
    lo = min([vmin] + ([low] if low is not None else []))
    hi = max([vmax] + ([high] if high is not None else []))
    span = hi - lo
    pad = 0.04 * span if span > 0 else max(abs(lo) * 1e-3, 1e-12)
    b0 = math.floor((lo - pad) / width)
    b1 = math.floor((hi + pad) / width)
    k = max(1, -(-(b1 - b0 + 1) // HISTOGRAM_BINS))  # grid bins per bar
    b0 -= (k * HISTOGRAM_BINS - (b1 - b0 + 1)) // 2  # centre what is left over
    counts = [0] * HISTOGRAM_BINS
    for b, n in bins:
        counts[min(max((int(b) - b0) // k, 0), HISTOGRAM_BINS - 1)] += n
    edges = tuple(float((b0 + j * k) * width) for j in range(HISTOGRAM_BINS + 1))
    return Histogram(edges, tuple(counts))


def stats_from_bins(defs: dict, rows: Any) -> tuple[CheckStats, ...]:
    """Statistics per check from bin rows (def, bin, n, s1, s2, vmin, vmax); ``defs`` maps a
    definition id to (plan id, step, measurement, unit, low, high, bin width)."""
    by_def: dict[int, list] = {}
    for d, b, n, s1, s2, lo, hi in rows:
        if int(n) > 0:
            by_def.setdefault(int(d), []).append((float(b), int(n), float(s1), float(s2),
                                                   float(lo), float(hi)))
    out = []
    for d, bins in by_def.items():
        plan_id, step, meas, unit, low, high, width = defs[d]
        n = sum(x[1] for x in bins)
        centre = [(b + 0.5) * width for b, *_ in bins]
        mean = math.fsum([x[1] * c + x[2] for x, c in zip(bins, centre, strict=True)]) / n
        ssd = math.fsum([x[3] + 2.0 * (c - mean) * x[2] + x[1] * (c - mean) ** 2
                         for x, c in zip(bins, centre, strict=True)])
        s = None if n < 2 else math.sqrt(max(ssd, 0.0) / (n - 1))
        vmin, vmax = min(x[4] for x in bins), max(x[5] for x in bins)
        out.append(CheckStats(
            plan_id=plan_id, step=step, measurement=meas, unit=unit, low=low, high=high,
            n=n, mean=mean, std=s, min=vmin, max=vmax, cpk=cpk(mean, s, low, high),
            histogram=_histogram([(x[0], x[1]) for x in bins], width, vmin, vmax, low, high)))
    out.sort(key=lambda c: (c.plan_id, c.step, c.measurement, c.low is None, c.low or 0.0))
    return tuple(out)


def bins_sql(conn: Any, latest_sql: str) -> str:
    """SQL binning the valid values of the runs that ``latest_sql`` (a ``WITH`` clause naming
    ``latest``) picks, as :func:`stats_from_bins` takes them."""
    dev = BIN_DEVIATION_SQL
    return (f"{latest_sql} SELECT v.def, v.bin, COUNT(*), SUM({dev}), SUM({dev} * {dev}),"
            " MIN(v.value), MAX(v.value) FROM (SELECT c.def, c.value, d.bin_width AS w,"
            f" {conn.floor_real('c.value / d.bin_width')} AS bin FROM checks c"
            " JOIN check_defs d ON d.id = c.def WHERE c.valid = 1 AND c.value IS NOT NULL"
            " AND c.run IN (SELECT id FROM latest)) v GROUP BY v.def, v.bin")
