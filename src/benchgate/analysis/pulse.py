"""Pulse timing: duty cycle by IEEE 181 state levels and 50 % reference-level crossings."""

from __future__ import annotations

import math

import numpy as np

from benchgate.analysis.capture import Capture
from benchgate.analysis.context import FEW_CYCLES, Context, get_context
from benchgate.analysis.measurement import Measurement
from benchgate.analysis.uncertainty import expand

#: fewest complete periods (rising edge to rising edge) a duty cycle is stated from.
MIN_PERIODS = 3
#: largest relative standard deviation of those periods for the waveform to count as periodic.
MAX_PERIOD_SCATTER = 0.2


def crossings(x: np.ndarray, low: float, high: float) -> tuple[np.ndarray, np.ndarray]:
    """Rising and falling 50 % reference-level instants (fractional samples).

    A transition counts once the waveform passes from below the 30 % level to above the
    70 % level (or back), so noise near the middle gives no extra crossings; its instant is
    the last 50 % crossing before that, by linear interpolation between samples.

    References
    ----------
    IEEE Std 181-2011: reference levels, linear interpolation of crossing instants.
    """
    span = high - low
    mid = low + 0.5 * span
    up = x >= low + 0.7 * span
    down = x <= low + 0.3 * span
    # a transition is the first sample of an upper-band run after a lower-band run (or back);
    # runs of one band separated only by middle samples are one stay in that band
    up_starts = _run_starts(up)
    down_starts = _run_starts(down)
    idx = np.concatenate((up_starts, down_starts))
    kind = np.concatenate((np.ones(up_starts.size, np.int8), -np.ones(down_starts.size, np.int8)))
    order = np.argsort(idx, kind="stable")
    idx, kind = idx[order], kind[order]
    turn = np.flatnonzero(kind[1:] != kind[:-1]) + 1
    rising_at = idx[turn][kind[turn] == 1]
    falling_at = idx[turn][kind[turn] == -1]
    # the last sample on the far side of 50 % before a transition is always the start of a
    # 50 % crossing, so only the (few) crossings need searching; a crossing is where a boolean
    # steps from False to True (True > False), no inverted copies needed
    at_or_above = x >= mid
    above = x > mid
    rise_cross = np.flatnonzero(at_or_above[1:] > at_or_above[:-1])  # x[i] < mid <= x[i+1]
    fall_cross = np.flatnonzero(above[:-1] > above[1:])  # x[i] > mid >= x[i+1]
    return _instants(x, rising_at, rise_cross, mid), _instants(x, falling_at, fall_cross, mid)


def _run_starts(mask: np.ndarray) -> np.ndarray:
    starts = np.flatnonzero(mask[1:] > mask[:-1]) + 1
    return np.concatenate(([0], starts)) if mask.size and mask[0] else starts


def _instants(x: np.ndarray, at: np.ndarray, candidates: np.ndarray, mid: float) -> np.ndarray:
    pos = np.searchsorted(candidates, at) - 1
    ok = pos >= 0
    i = candidates[pos[ok]]
    i = i[i + 1 < x.size]
    x0, x1 = x[i], x[i + 1]
    frac = np.where(x1 != x0, (mid - x0) / np.where(x1 != x0, x1 - x0, 1.0), 0.0)
    return i + np.clip(frac, 0.0, 1.0)


def duty_cycle(capture: Capture, *, context: Context | None = None) -> Measurement:
    """High-time duty cycle (%) of the steady part: pulse duration / period at the 50 % level.

    Parameters
    ----------
    capture : Capture
        A two-level (pulse) waveform (V) with at least MIN_PERIODS + 1 rising edges.
    context : Context, optional

    Returns
    -------
    Measurement
        Mean over the complete periods (rising edge to rising edge). U (k = 2) combines the
        standard deviation of the mean over periods and a rectangular one-sample resolution
        of each crossing. Invalid with fewer than 3 complete periods, or when no periodic
        waveform was found: no tone detected (noise alone), or periods that scatter by more
        than 20 % of their mean (threshold crossings of noise, common practice, no source).

    References
    ----------
    IEEE Std 181-2011: state levels (histogram), 50 % reference level, pulse duration and
    period between 50 % crossings.
    """
    ctx = get_context(capture, context)
    if ctx.fatal:
        return Measurement.invalid("duty_cycle", "%", ctx.fatal)
    y = ctx.y
    low, high = ctx.steady_levels
    if not high > low:
        return Measurement.invalid("duty_cycle", "%", "flat line: no transitions")
    rise, fall = crossings(y, low, high)
    if rise.size < MIN_PERIODS + 1:
        return Measurement.invalid("duty_cycle", "%", f"fewer than {MIN_PERIODS} complete periods "
                                   f"({max(rise.size - 1, 0)})")
    if ctx.tone.fit is None or (ctx.tone.reason and not ctx.tone.reason.startswith(FEW_CYCLES)):
        # noise has no periods to time, however many threshold crossings it makes
        return Measurement.invalid("duty_cycle", "%", ctx.tone.reason or "no periodic waveform")
    nxt = np.searchsorted(fall, rise[:-1])
    ok = nxt < fall.size
    starts, ends = rise[:-1][ok], rise[1:][ok]
    falls = fall[nxt[ok]]
    inside = falls < ends
    starts, ends, falls = starts[inside], ends[inside], falls[inside]
    if starts.size < MIN_PERIODS:
        return Measurement.invalid("duty_cycle", "%", f"fewer than {MIN_PERIODS} complete periods")
    period = ends - starts
    scatter = float(np.std(period)) / float(np.mean(period))
    if scatter > MAX_PERIOD_SCATTER:
        # edges of noise (or of a waveform whose threshold crossings wander) are not periods
        return Measurement.invalid("duty_cycle", "%", f"no periodic waveform: the periods between rising "
                                   f"edges scatter by {100 * scatter:.0f} % (more than "
                                   f"{100 * MAX_PERIOD_SCATTER:.0f} %)")
    duty = 100.0 * (falls - starts) / period
    k = duty.size
    u_a = float(np.std(duty, ddof=1)) / math.sqrt(k)
    u_res = 100.0 * math.sqrt(2.0) * (1.0 / math.sqrt(12.0)) / float(np.mean(period)) / math.sqrt(k)
    details = {"periods": k, "low_state_v": low, "high_state_v": high,
               "mean_period_s": float(np.mean(period)) / capture.sample_rate}
    return Measurement("duty_cycle", float(np.mean(duty)), "%", expand(u_a, u_res), details=details)
