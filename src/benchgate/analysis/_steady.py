"""Oscillation envelope and where the steady part of a record begins.

The envelope is a sliding one-period estimate of the peak amplitude, √2 times the local
standard deviation (local mean removed), computed with cumulative sums in O(N).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

NOT_STEADY = "amplitude not steady in the last part of the record (dropouts?)"
STILL_CHANGING = "amplitude still changing at the end of the record"

#: fraction of the record at its end taken as "steady" for the reference amplitude.
TAIL_FRACTION = 0.25


@dataclass(frozen=True)
class Envelope:
    """Sliding amplitude: ``level[i]`` (V peak) is centred on sample ``centre[i]``."""

    centre: np.ndarray
    level: np.ndarray
    window: int


@dataclass(frozen=True)
class Steady:
    """Where the steady part begins and how the record got there."""

    start: int  # first sample of the steady part
    level: float  # steady envelope amplitude (V peak)
    tolerance: float  # envelope band (V) counted as steady
    startup_index: float | None  # fractional sample where the envelope first reaches 90 %
    growing: bool  # envelope still changing at the end of the record
    warning: str | None


def envelope(x: np.ndarray, period_samples: float, stride: int | None = None) -> Envelope:
    """Sliding one-period amplitude envelope of ``x``.

    The window spans exactly one period (a fractional number of samples): the cumulative
    sums are interpolated at the window's fractional end, which removes the ripple a whole
    number of samples would leave (it would bias the start-up crossing on slow envelopes).
    """
    n = x.size
    p = float(min(max(4.0, period_samples), n - 1.0))
    m = int(math.floor(p))
    frac = p - m
    xc = x - x.mean()
    c1 = np.empty(n + 1)
    c2 = np.empty(n + 1)
    c1[0] = c2[0] = 0.0
    np.cumsum(xc, out=c1[1:])
    sq = xc * xc
    np.cumsum(sq, out=c2[1:])
    stride = max(1, m // 8) if stride is None else stride
    starts = np.arange(0, n - m, stride)
    ends = starts + m
    s1 = (c1[ends] - c1[starts] + frac * xc[ends]) / p
    s2 = (c2[ends] - c2[starts] + frac * sq[ends]) / p
    var = np.maximum(s2 - s1 * s1, 0.0)
    return Envelope(centre=starts + (p - 1.0) / 2.0, level=np.sqrt(2.0 * var), window=int(round(p)))


def find_steady(env: Envelope, n: int, cycles: float, noise_var: float) -> Steady:
    """Reference amplitude from the last part of the record, start-up crossing, steady start.

    The steady part begins one window after the last envelope point outside the steady
    band: ±(max(1 % of the level, 5.5 standard deviations of the envelope noise, twice the
    75th percentile of the tail's own deviations — ripple of a coarsely sampled period or of
    harmonics, but not brief dropouts) + a small allowance for the window). The envelope noise follows from the
    record's noise variance ``noise_var`` (σ², from a sine fit to the tail): the variance
    over M samples of sine plus noise has variance (4σ²S + 2σ⁴)/M, S = A²/2 (derived), so
    noise alone practically never trims a steady record. Records shorter than 8 cycles are
    taken as steady from their first sample.
    """
    level_all = env.level
    tail_from = n * (1.0 - TAIL_FRACTION)
    tail = level_all[env.centre >= tail_from]
    if tail.size == 0:
        tail = level_all[-1:]
    level = float(np.median(tail))
    m = env.window
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
        start = int(math.ceil(env.centre[alive[-1]] + env.window)) if alive.size else 0
        warning = "no oscillation at the end of the record" if alive.size else None
        return Steady(min(start, n), level, 0.0, None, False, warning)
    above = np.flatnonzero(level_all >= 0.9 * level)
    startup = None
    if above.size:
        i = int(above[0])
        if i == 0:
            startup = 0.0
        else:
            lo, hi = level_all[i - 1], level_all[i]
            frac = (0.9 * level - lo) / (hi - lo) if hi > lo else 1.0
            startup = float(env.centre[i - 1] + frac * (env.centre[i] - env.centre[i - 1]))
    if cycles < 8:
        return Steady(0, level, tol, startup, growing, None)
    outside = np.flatnonzero(np.abs(level_all - level) > tol)
    start = 0
    warning = None
    if outside.size:
        start = int(math.ceil(env.centre[outside[-1]] + env.window))
        limit = int(n * (1.0 - TAIL_FRACTION))
        if start > limit:
            start = limit
            warning = NOT_STEADY
    if growing:
        warning = STILL_CHANGING
    return Steady(min(start, n), level, tol, startup, growing, warning)
