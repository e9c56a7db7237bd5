"""Oscillation envelope and where the steady part of a capture begins.

The envelope is a sliding one-period estimate of the peak amplitude, √2 times the local
standard deviation (local mean removed), computed with cumulative sums in O(N).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from benchgate.analysis._phasor import CHUNK_MACS

NOT_STEADY = "amplitude not steady in the last part of the capture (dropouts?)"
STILL_CHANGING = "amplitude still changing at the end of the capture"

#: fraction of the capture at its end taken as "steady" for the reference amplitude.
TAIL_FRACTION = 0.25


@dataclass(frozen=True)
class Envelope:
    """Sliding amplitude: ``level[i]`` (V peak) is centred on sample ``centre[i]``."""

    centre: np.ndarray
    level: np.ndarray
    span: int


@dataclass(frozen=True)
class Steady:
    """Where the steady part begins and how the capture got there."""

    start: int  # first sample of the steady part
    level: float  # steady envelope amplitude (V peak)
    tolerance: float  # envelope band (V) counted as steady
    startup_index: float | None  # fractional sample where the envelope first reaches 90 %
    growing: bool  # envelope still changing at the end of the capture
    warning: str | None
    startup_u: float = 0.0  # standard uncertainty (samples) of the crossing from envelope noise


def envelope(x: np.ndarray, period_samples: float, stride: int | None = None) -> Envelope:
    """Sliding one-period amplitude envelope of ``x``.

    The span is exactly one period (a fractional number of samples; for periods under
    4 samples, the fewest whole periods covering 4 samples): the cumulative
    sums are interpolated at the span's fractional end, which removes the ripple a whole
    number of samples would leave (it would bias the start-up crossing on slow envelopes).

    References
    ----------
    Sliding rms over one period, √2 times it for a sine's peak: common practice, no source
    (the rms of a sine over whole periods, handbook formula).
    """
    n = x.size
    period = float(period_samples)
    # at least 4 samples, and a whole number of periods (a span of 4 samples over a period
    # of 2.5 would ripple by tens of per cent and look like a changing amplitude)
    p = period * math.ceil(4.0 / period) if 0.0 < period < 4.0 else max(4.0, period)
    p = float(min(p, n - 1.0))
    m = int(math.floor(p))
    frac = p - m
    stride = max(1, m // 8) if stride is None else stride
    starts = np.arange(0, n - m, stride)
    # running sums of x − mean and its square, needed only where a span starts or ends: at
    # multiples of the stride and at those plus (m mod stride)
    mean = x.mean()
    (c1_start, c1_end), (c2_start, c2_end) = _sums_at(x, mean, stride, m, starts.size)
    end_x = x[m:m + starts.size * stride:stride] - mean  # x − mean at the span ends
    s1 = c1_end - c1_start
    s1 += frac * end_x
    s1 /= p
    s2 = c2_end - c2_start
    end_x *= end_x
    s2 += frac * end_x
    s2 /= p
    s1 *= s1
    var = np.maximum(s2 - s1, 0.0)
    return Envelope(centre=starts + (p - 1.0) / 2.0, level=np.sqrt(2.0 * var), span=int(round(p)))


def _sums_at(x: np.ndarray, mean: float, stride: int, m: int,
             count: int) -> tuple[tuple[np.ndarray, np.ndarray], tuple[np.ndarray, np.ndarray]]:
    """For v = x − mean and v = (x − mean)²: Σ v[:j·stride] and Σ v[:j·stride + m] for
    j = 0 … count−1. Each block of ``stride`` samples gives its sum before offset m mod stride
    and its whole sum (one matrix product with a 0/1 matrix), then a running sum goes over the
    blocks, not the samples. The capture is taken a few thousand samples at a time, so no
    temporary the size of the capture is made (they stay in the processor's cache)."""
    q, r = divmod(m, stride)
    n = x.size
    split = np.zeros((stride, 2))
    split[:r, 0] = 1.0  # the block's sum before offset r …
    split[:, 1] = 1.0  # … and its whole sum
    blocks = n // stride + 1  # the last one partial (zero-padded) or empty
    ab = np.zeros((2, blocks, 2))
    rows = max(1, CHUNK_MACS // (2 * stride))
    for first in range(0, blocks, rows):
        last = min(first + rows, blocks)
        part = x[first * stride:last * stride] - mean
        if part.size < (last - first) * stride:  # the partial last block
            part = np.concatenate((part, np.zeros((last - first) * stride - part.size)))
        part = part.reshape(-1, stride)
        np.matmul(part, split, out=ab[0, first:last])
        part *= part
        np.matmul(part, split, out=ab[1, first:last])
    out = []
    for k in range(2):
        before = np.empty(blocks + 1)
        before[0] = 0.0
        np.cumsum(ab[k, :, 1], out=before[1:])
        out.append((before[:count], before[q:q + count] + ab[k, q:q + count, 0]))
    return out[0], out[1]


def _smoothing_periods(level: float, sd_env: float) -> int:
    """Periods to average the envelope over so its noise falls to about 0.5 % of the level."""
    if not (level > 0 and math.isfinite(sd_env)):
        return 1
    return int(min(64, max(1, math.ceil((sd_env / (0.005 * level)) ** 2))))


def _crossing(env: Envelope, level: float, sd_env: float) -> tuple[float | None, float]:
    """First 90 % crossing of the envelope (fractional sample) and its standard uncertainty.

    A noisy envelope crosses early on its first noise excursion; averaging it (centred) over
    enough periods first keeps that bias below the rest of the budget. The remaining noise
    gives u_t = σ_env / (√K · slope) at the crossing; the smoothing's own bias on a curved
    envelope is bounded by half its width (rectangular).
    """
    lv = env.level
    if lv.size == 0 or not level > 0:
        return None, 0.0
    k = _smoothing_periods(level, sd_env)
    points_per_period = max(1, int(round(lv.size / max(env.centre[-1] - env.centre[0], 1.0) * env.span)))
    width = min(k * points_per_period, max(1, lv.size // 8))
    if width > 1:
        lv = _smoothed_until(lv, width, 0.9 * level)
    above = np.flatnonzero(lv >= 0.9 * level)
    if above.size == 0:
        return None, 0.0
    i = int(above[0])
    if i == 0:
        return 0.0, 0.0
    lo_v, hi_v = lv[i - 1], lv[i]
    dt = env.centre[i] - env.centre[i - 1]
    frac = (0.9 * level - lo_v) / (hi_v - lo_v) if hi_v > lo_v else 1.0
    at = float(env.centre[i - 1] + frac * dt)
    # slope over the smoothing width (a two-point slope of a noisy curve would be noisy)
    j0, j1 = max(i - max(width // 2, 1), 0), min(i + max(width // 2, 1), lv.size - 1)
    span = env.centre[j1] - env.centre[j0]
    slope = (lv[j1] - lv[j0]) / span if span > 0 and lv[j1] > lv[j0] else 0.0  # V per sample
    noise = sd_env / math.sqrt(max(width / points_per_period, 1.0)) if math.isfinite(sd_env) else 0.0
    u = noise / slope if slope > 0 else 0.0
    if width > 1:
        # a centred average over W samples of a rising envelope crosses a level within ±W/2 of
        # where the envelope itself crosses it (the average lies between the envelope's values
        # at the span's ends): a rectangular bound for the bias of the smoothing (derived)
        step = float(env.centre[1] - env.centre[0]) if env.centre.size > 1 else 1.0
        u = math.hypot(u, 0.5 * width * step / math.sqrt(3.0))
    return at, float(min(u, env.centre[-1]))


def _smoothed_until(lv: np.ndarray, width: int, threshold: float) -> np.ndarray:
    """The centred moving average of ``lv`` over ``width`` points (shorter at the ends), computed
    over a growing prefix only until it reaches ``threshold`` plus half a width beyond (all the
    crossing and its slope look at). The running sum of a prefix is the prefix of the running
    sum, so the values are those of the whole average."""
    size = lv.size
    half = width // 2
    upto = min(size, 4 * width + 1024)
    while True:
        c = np.concatenate(([0.0], np.cumsum(lv[:min(upto + half + 1, size)])))
        i = np.arange(upto)
        lo = np.clip(i - half, 0, size)
        hi = np.clip(i + half + 1, 0, size)
        out = (c[hi] - c[lo]) / (hi - lo)
        hit = np.flatnonzero(out >= threshold)
        if upto == size or (hit.size and int(hit[0]) + half + 1 < upto):
            return out
        upto = min(size, 4 * upto)


def find_steady(env: Envelope, n: int, cycles: float, noise_var: float) -> Steady:
    """Reference amplitude from the last part of the capture, start-up crossing, steady start.

    The steady part begins one span after the last envelope point outside the steady
    band: ±(max(1 % of the level, 5.5 standard deviations of the envelope noise, twice the
    75th percentile of the tail's own deviations — ripple of a coarsely sampled period or of
    harmonics, but not brief dropouts) + a small allowance for the span). The envelope noise follows from the
    capture's noise variance ``noise_var`` (σ², from a sine fit to the tail): the variance
    over M samples of sine plus noise has variance (4σ²S + 2σ⁴)/M, S = A²/2 (derived), so
    noise alone practically never trims a steady capture. Records shorter than 8 cycles are
    taken as steady from their first sample.

    References
    ----------
    IEEE Std 181-2011, settling: the instant after which a waveform stays within a stated band
    around its final state level (applied here to the oscillation's envelope; from memory).
    JCGM 100:2008 for the noise band. See docs/references.md.
    """
    level_all = env.level
    tail_from = n * (1.0 - TAIL_FRACTION)
    tail = level_all[env.centre >= tail_from]
    if tail.size == 0:
        tail = level_all[-1:]
    level = float(np.median(tail))
    m = env.span
    s_mean = 0.5 * level * level
    sd_var = math.sqrt(max(4.0 * noise_var * s_mean + 2.0 * noise_var * noise_var, 0.0) / m)
    sd_env = sd_var / level if level > 0 else math.inf
    base_tol = max(0.01 * level, 5.5 * sd_env) + level * 0.1 / m
    ripple = 2.0 * float(np.percentile(np.abs(tail - level), 75)) if tail.size else 0.0
    tol = max(base_tol, ripple)
    half = tail.size // 2
    growing = bool(half >= 2 and abs(float(np.median(tail[half:])) - float(np.median(tail[:half]))) > base_tol)
    if level <= 0:
        # the oscillation (if any) died out: the steady part is the dead tail
        alive = np.flatnonzero(level_all > 0)
        start = int(math.ceil(env.centre[alive[-1]] + env.span)) if alive.size else 0
        warning = "no oscillation at the end of the capture" if alive.size else None
        return Steady(min(start, n), level, 0.0, None, False, warning)
    startup, startup_u = _crossing(env, level, sd_env)
    if cycles < 8:
        return Steady(0, level, tol, startup, growing, None, startup_u)
    outside = np.flatnonzero(np.abs(level_all - level) > tol)
    start = 0
    warning = None
    if outside.size:
        start = int(math.ceil(env.centre[outside[-1]] + env.span))
        limit = int(n * (1.0 - TAIL_FRACTION))
        if start > limit:
            start = limit
            warning = NOT_STEADY
    if growing:
        warning = STILL_CHANGING
    return Steady(min(start, n), level, tol, startup, growing, warning, startup_u)
