"""Measurements over a frequency sweep: the −3 dB frequencies and the pass-band ripple.

A :class:`FrequencySweep` holds one :class:`ResponsePoint` per stimulus frequency (each the
gain in dB measured by :func:`benchgate.analysis.response.gain_db` with its U). The −3 dB
frequencies are found by linear interpolation of the gain in dB over log10(f) between the two
points that bracket the crossing.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

from benchgate.analysis.measurement import Measurement
from benchgate.analysis.uncertainty import K_COVERAGE, expand

#: the half-power level, 20·log10(1/√2) dB (the "−3 dB" point).
HALF_POWER_DB = 20.0 * math.log10(math.sqrt(0.5))


@dataclass(frozen=True)
class ResponsePoint:
    """The response at one stimulus frequency (Hz): gain in dB and phase in degrees."""

    frequency: float
    gain_db: Measurement
    phase: Measurement | None = None


@dataclass(frozen=True)
class FrequencySweep:
    """The points of a stepped sweep, and how the pass band is defined.

    Parameters
    ----------
    points : sequence of ResponsePoint
        In any order; sorted by frequency here.
    reference_frequency : float or None
        Where the pass-band gain is taken (Hz; must be one of the points). None: the point of
        largest gain.
    passband : (float, float) or None
        Frequency range (Hz) over which ripple is measured. None: every point.
    """

    points: tuple[ResponsePoint, ...]
    reference_frequency: float | None = None
    passband: tuple[float, float] | None = None

    def __post_init__(self) -> None:
        object.__setattr__(self, "points", tuple(sorted(self.points, key=lambda p: p.frequency)))


def _reference(sweep: FrequencySweep) -> tuple[int, str | None]:
    pts = sweep.points
    if len(pts) < 2:
        return -1, "fewer than two sweep points"
    if sweep.reference_frequency is not None:
        for i, p in enumerate(pts):
            if math.isclose(p.frequency, sweep.reference_frequency, rel_tol=1e-9):
                if not p.gain_db.valid or p.gain_db.uncertainty is None:
                    return -1, f"the gain at the reference frequency is not valid: {p.gain_db.reason or 'a bound only'}"
                return i, None
        return -1, f"no sweep point at the reference frequency {sweep.reference_frequency:g} Hz"
    usable = [i for i, p in enumerate(pts) if p.gain_db.valid and p.gain_db.uncertainty is not None]
    if not usable:
        return -1, "no valid gain in the sweep"
    return max(usable, key=lambda i: pts[i].gain_db.value), None


def _crossing(sweep: FrequencySweep, name: str, direction: int) -> Measurement:
    pts = sweep.points
    ref, problem = _reference(sweep)
    if problem:
        return Measurement.invalid(name, "Hz", problem)
    g_ref = pts[ref].gain_db
    target = g_ref.value + HALF_POWER_DB
    i = ref
    while 0 <= i + direction < len(pts):
        j = i + direction
        a, b = pts[i], pts[j]
        for p in (a, b):
            if not p.gain_db.valid:
                return Measurement.invalid(name, "Hz", f"the gain at {p.frequency:g} Hz is not valid: {p.gain_db.reason}")
        if b.gain_db.value <= target:
            return _interpolate(name, sweep, ref, i, j, target)
        i = j
    side = "above the highest" if direction > 0 else "below the lowest"
    return Measurement.invalid(name, "Hz", f"the response does not fall by 3 dB within the sweep "
                                           f"(the −3 dB frequency lies {side} frequency swept)")


def _interpolate(name: str, sweep: FrequencySweep, ref: int, i: int, j: int, target: float) -> Measurement:
    pts = sweep.points
    a, b = pts[i], pts[j]
    xa, xb = math.log10(a.frequency), math.log10(b.frequency)
    ya, yb = a.gain_db.value, b.gain_db.value
    if b.gain_db.uncertainty is None:  # an upper bound at or below the target: the crossing is in (a, b]
        x = xb
        span = abs(xb - xa)
        u_x = span / math.sqrt(3.0)
    else:
        t = (target - ya) / (yb - ya)
        x = xa + t * (xb - xa)
        slope = (yb - ya) / (xb - xa)  # dB per decade
        ua = (a.gain_db.uncertainty or 0.0) / K_COVERAGE
        ub = b.gain_db.uncertainty / K_COVERAGE
        ur = (pts[ref].gain_db.uncertainty or 0.0) / K_COVERAGE
        # x = xa + (y_ref + H − ya)/slope: partial derivatives for ya, yb and the reference level
        dxa = (t - 1.0) / slope
        dxb = -t / slope
        dxr = 1.0 / slope
        if i == ref:  # the bracket starts at the reference point: ya is y_ref
            u_stat = math.hypot((dxa + dxr) * ua, dxb * ub)
        else:
            u_stat = math.sqrt((dxa * ua) ** 2 + (dxb * ub) ** 2 + (dxr * ur) ** 2)
        u_x = math.hypot(u_stat, _curvature(pts, i, j, target, x) / math.sqrt(3.0))
    f = 10.0 ** x
    u_f = f * math.log(10.0) * u_x
    details = {"method": "linear interpolation of gain (dB) over log10 f between the bracketing points",
               "bracket_hz": [a.frequency, b.frequency], "reference_hz": pts[ref].frequency,
               "reference_gain_db": pts[ref].gain_db.value, "level_db": target}
    return Measurement(name, f, "Hz", K_COVERAGE * u_f, details=details)


def _curvature(pts: Sequence[ResponsePoint], i: int, j: int, target: float, x: float) -> float:
    """Half-width (decades) bounding the interpolation error: the distance between the straight
    line's crossing and that of the parabola through the bracket and its next valid neighbour."""
    k = j + (j - i)
    if not 0 <= k < len(pts) or not pts[k].gain_db.valid or pts[k].gain_db.uncertainty is None:
        k = i - (j - i)
        if not 0 <= k < len(pts) or not pts[k].gain_db.valid or pts[k].gain_db.uncertainty is None:
            span = abs(math.log10(pts[j].frequency) - math.log10(pts[i].frequency))
            return 0.25 * span  # no third point: a quarter of the bracket, stated plainly
    xs = [math.log10(pts[m].frequency) for m in (i, j, k)]
    ys = [pts[m].gain_db.value for m in (i, j, k)]
    lo, hi = sorted((xs[0], xs[1]))
    best = x
    # the parabola's crossing of the target inside the bracket (bisection on a monotone piece)
    f_lo, f_hi = _lagrange(xs, ys, lo) - target, _lagrange(xs, ys, hi) - target
    if f_lo * f_hi <= 0:
        a, b = lo, hi
        for _ in range(60):
            mid = 0.5 * (a + b)
            fm = _lagrange(xs, ys, mid) - target
            if (fm <= 0) == (f_lo <= 0):
                a, f_lo = mid, fm
            else:
                b = mid
        best = 0.5 * (a + b)
    return abs(best - x)


def _lagrange(xs: Sequence[float], ys: Sequence[float], x: float) -> float:
    total = 0.0
    for m in range(3):
        term = ys[m]
        for q in range(3):
            if q != m:
                term *= (x - xs[q]) / (xs[m] - xs[q])
        total += term
    return total


def f_3db_low(sweep: FrequencySweep) -> Measurement:
    """Lower −3 dB (half-power) frequency (Hz): the first crossing below the reference point.

    Returns
    -------
    Measurement
        Interpolated linearly in dB over log10 f between the bracketing points. U (k = 2)
        propagates the gain U of the two points and of the reference to first order, and adds
        a rectangular bound for the interpolation error (the distance to the crossing of the
        parabola through the bracket and its next point). Invalid when the response does not
        fall by 3 dB within the sweep or a point on the way is not valid.

    References
    ----------
    JCGM 100:2008, 5.1.2 (first-order propagation) and 4.3.7 (rectangular bound); the
    half-power definition of a cut-off frequency (common practice).
    """
    return _crossing(sweep, "f_3db_low", -1)


def f_3db_high(sweep: FrequencySweep) -> Measurement:
    """Upper −3 dB (half-power) frequency (Hz): the first crossing above the reference point.

    See :func:`f_3db_low` for the method and its uncertainty.
    """
    return _crossing(sweep, "f_3db_high", +1)


def passband_gain_db(sweep: FrequencySweep) -> Measurement:
    """The pass-band gain (dB): the gain at the reference frequency (or the largest gain)."""
    ref, problem = _reference(sweep)
    if problem:
        return Measurement.invalid("passband_gain_db", "dB", problem)
    g = sweep.points[ref].gain_db
    return Measurement("passband_gain_db", g.value, "dB", g.uncertainty,
                       details={"reference_hz": sweep.points[ref].frequency})


def ripple(sweep: FrequencySweep) -> Measurement:
    """Pass-band ripple (dB): largest minus smallest gain over the points in the pass band.

    Returns
    -------
    Measurement
        U combines the U of the two extreme points in quadrature (a bound on the spread of the
        points swept, not on what lies between them). Invalid with fewer than two points in
        the pass band or any point there not valid.

    References
    ----------
    JCGM 100:2008, 5.1.2.
    """
    pts = sweep.points
    if sweep.passband is not None:
        lo, hi = sweep.passband
        pts = tuple(p for p in pts if lo <= p.frequency <= hi)
    if len(pts) < 2:
        return Measurement.invalid("ripple", "dB", "fewer than two sweep points in the pass band")
    for p in pts:
        if not p.gain_db.valid or p.gain_db.uncertainty is None:
            return Measurement.invalid("ripple", "dB", f"the gain at {p.frequency:g} Hz is not valid: "
                                                       f"{p.gain_db.reason or 'a bound only'}")
    top = max(pts, key=lambda p: p.gain_db.value)
    bottom = min(pts, key=lambda p: p.gain_db.value)
    value = top.gain_db.value - bottom.gain_db.value
    u = expand(top.gain_db.uncertainty / K_COVERAGE, bottom.gain_db.uncertainty / K_COVERAGE)
    return Measurement("ripple", value, "dB", u,
                       details={"points": len(pts), "max_at_hz": top.frequency, "min_at_hz": bottom.frequency})
