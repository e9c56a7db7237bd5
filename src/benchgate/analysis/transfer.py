"""Measurements over a level sweep: THD at a stated output level and the clipping point.

A :class:`LevelSweep` holds one :class:`LevelPoint` per stimulus level at one frequency: the
input and output amplitudes and the output THD, each a :class:`Measurement` from
:mod:`benchgate.analysis.response`. Both results interpolate linearly between the two
points that bracket the stated level, THD on a logarithmic scale (it grows by orders of
magnitude as a stage starts to clip).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from benchgate.analysis.measurement import Measurement
from benchgate.analysis.uncertainty import K_COVERAGE


@dataclass(frozen=True)
class LevelPoint:
    """The response to one stimulus level (amplitudes in V peak, THD in %)."""

    input_amplitude: Measurement
    output_amplitude: Measurement
    thd: Measurement


@dataclass(frozen=True)
class LevelSweep:
    """The points of a level sweep, sorted by input amplitude.

    Parameters
    ----------
    points : sequence of LevelPoint
    output_level : float or None
        The output amplitude (V peak) at which ``thd_at_level`` is stated.
    thd_limit : float or None
        The THD (%) that defines the clipping point for ``clip_level``.
    """

    points: tuple[LevelPoint, ...]
    output_level: float | None = None
    thd_limit: float | None = None

    def __post_init__(self) -> None:
        object.__setattr__(self, "points", tuple(sorted(
            self.points, key=lambda p: p.input_amplitude.value if p.input_amplitude.valid else math.inf)))


def _usable(p: LevelPoint) -> str | None:
    for m in (p.input_amplitude, p.output_amplitude, p.thd):
        if not m.valid:
            return f"{m.name} not valid: {m.reason}"
        if m.uncertainty is None:
            return f"{m.name} has no stated uncertainty"
    return None


def _log(x: float) -> float:
    return math.log10(max(x, 1e-12))


def thd_at_level(sweep: LevelSweep) -> Measurement:
    """Output THD (%) at the stated output amplitude, interpolated between sweep points.

    Returns
    -------
    Measurement
        log10(THD) interpolated linearly over the output amplitude between the two points
        that bracket ``output_level``. U (k = 2) propagates the THD U of both points (first
        order) and takes the larger of the two bracketing THD values minus the result as a
        rectangular bound for the interpolation. Invalid when the stated level lies outside
        the levels reached, or a bracketing point is not valid.

    References
    ----------
    IEEE Std 1241-2010 (THD referred to the fundamental); JCGM 100:2008, 5.1.2 and 4.3.7.
    """
    name = "thd_at_level"
    level = sweep.output_level
    if level is None or not level > 0:
        return Measurement.invalid(name, "%", "no output level stated for the THD")
    pts = sweep.points
    for a, b in zip(pts, pts[1:], strict=False):
        for p in (a, b):
            problem = _usable(p)
            if problem:
                return Measurement.invalid(name, "%", f"at input {p.input_amplitude.value:g} V: {problem}")
        oa, ob = a.output_amplitude.value, b.output_amplitude.value
        if min(oa, ob) <= level <= max(oa, ob) and oa != ob:
            t = (level - oa) / (ob - oa)
            la, lb = _log(a.thd.value), _log(b.thd.value)
            value = 10.0 ** (la + t * (lb - la))
            # d value / d thd_a = value·(1 − t)/thd_a, likewise for b
            ua = value * (1.0 - t) * (a.thd.uncertainty / K_COVERAGE) / max(a.thd.value, 1e-12)
            ub = value * t * (b.thd.uncertainty / K_COVERAGE) / max(b.thd.value, 1e-12)
            interp = abs(max(a.thd.value, b.thd.value) - value) / math.sqrt(3.0) * 0.5
            u = K_COVERAGE * math.sqrt(ua * ua + ub * ub + interp * interp)
            return Measurement(name, value, "%", u, details={
                "output_level_v": level, "bracket_input_v": [a.input_amplitude.value, b.input_amplitude.value],
                "method": "log-THD interpolated over output amplitude between the bracketing points"})
    return Measurement.invalid(name, "%", f"the output level {level:g} V was not reached between the "
                                          "lowest and highest sweep levels")


def clip_level(sweep: LevelSweep) -> Measurement:
    """Input amplitude (V peak) at which the output THD first reaches the stated limit.

    Returns
    -------
    Measurement
        The first pair of points (in rising input level) whose THD brackets ``thd_limit``;
        the input amplitude is interpolated linearly against log10(THD). U (k = 2) combines
        the bracket's input-amplitude U and the THD U propagated through the slope, and a
        rectangular bound of half the bracket for the interpolation. Invalid when the THD
        never reaches the limit (the clipping point lies above the highest level swept), is
        already above it at the lowest level, or a point on the way is not valid.

    References
    ----------
    IEEE Std 1241-2010 (THD); JCGM 100:2008, 5.1.2 and 4.3.7.
    """
    name = "clip_level"
    limit = sweep.thd_limit
    if limit is None or not limit > 0:
        return Measurement.invalid(name, "V", "no THD limit stated for the clipping point")
    pts = sweep.points
    if len(pts) < 2:
        return Measurement.invalid(name, "V", "fewer than two sweep levels")
    first = _usable(pts[0])
    if first:
        return Measurement.invalid(name, "V", f"at the lowest level: {first}")
    if pts[0].thd.value >= limit:
        return Measurement.invalid(name, "V", f"the THD is already {pts[0].thd.value:.3g} % at the lowest "
                                              f"level (limit {limit:g} %)")
    target = _log(limit)
    for a, b in zip(pts, pts[1:], strict=False):
        problem = _usable(b)
        if problem:
            return Measurement.invalid(name, "V", f"at input {b.input_amplitude.value:g} V: {problem}")
        if b.thd.value >= limit:
            la, lb = _log(a.thd.value), _log(b.thd.value)
            xa, xb = a.input_amplitude.value, b.input_amplitude.value
            t = (target - la) / (lb - la)
            x = xa + t * (xb - xa)
            slope = (lb - la) / (xb - xa)  # decades of THD per volt
            u_la = a.thd.uncertainty / K_COVERAGE / (max(a.thd.value, 1e-12) * math.log(10.0))
            u_lb = b.thd.uncertainty / K_COVERAGE / (max(b.thd.value, 1e-12) * math.log(10.0))
            u_thd = math.hypot((t - 1.0) * u_la, t * u_lb) / abs(slope)
            u_in = math.hypot((1 - t) * a.input_amplitude.uncertainty, t * b.input_amplitude.uncertainty) / K_COVERAGE
            interp = 0.5 * (xb - xa) / math.sqrt(3.0)
            u = K_COVERAGE * math.sqrt(u_thd ** 2 + u_in ** 2 + interp ** 2)
            return Measurement(name, x, "V", u, details={
                "thd_limit_pct": limit, "bracket_input_v": [xa, xb],
                "method": "input amplitude interpolated against log THD between the bracketing levels"})
    return Measurement.invalid(name, "V", f"the THD stays below {limit:g} % up to the highest level swept "
                                          f"({pts[-1].input_amplitude.value:g} V)")
