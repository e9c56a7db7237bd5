"""Plot data for reports (pure functions, no plotting): spectrum, envelope, a few cycles."""

from __future__ import annotations

import math

import numpy as np

from benchgate.analysis.capture import Capture
from benchgate.analysis.spectrum import power_spectrum


def spectrum_db(capture: Capture, *, steady_start: float = 0.0,
                max_points: int = 2048) -> tuple[np.ndarray, np.ndarray]:
    """Blackman–Harris power spectrum of the record from ``steady_start`` (s) on, in dB
    relative to its largest bin (the fundamental), reduced to at most ``max_points`` points
    by keeping the largest bin of each group (peaks survive the reduction).

    Returns empty arrays when fewer than 16 finite samples remain.
    """
    start = max(0, int(round((steady_start - 0.0) * capture.sample_rate)))
    x = capture.samples[start:]
    if x.size < 16 or not np.all(np.isfinite(x)):
        return np.zeros(0), np.zeros(0)
    spec = power_spectrum(x, capture.sample_rate, "blackmanharris")
    freqs, power = spec.freqs, spec.power
    ref = float(np.max(power[1:])) if power.size > 1 else 0.0
    if ref <= 0:
        return freqs[:0], power[:0]
    if power.size > max_points:
        group = math.ceil(power.size / max_points)
        m = power.size // group * group
        p2 = power[:m].reshape(-1, group)
        idx = np.argmax(p2, axis=1) + np.arange(p2.shape[0]) * group
        freqs, power = freqs[idx], power[idx]
    level = 10.0 * np.log10(np.maximum(power, ref * 1e-20) / ref)
    return freqs, level


def envelope(capture: Capture, points: int = 600) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Min/max per bucket over the whole record: (bucket start times s, low V, high V)."""
    x = capture.samples
    if x.size == 0:
        return np.zeros(0), np.zeros(0), np.zeros(0)
    points = max(1, min(points, x.size))
    edges = np.linspace(0, x.size, points + 1).astype(np.int64)
    starts = np.unique(edges[:-1])
    finite = np.where(np.isfinite(x), x, np.nan)
    low = np.fmin.reduceat(finite, starts)
    high = np.fmax.reduceat(finite, starts)
    t = capture.start_time + starts / capture.sample_rate
    return t, low, high


def cycles(capture: Capture, fundamental: float | None, n_cycles: int = 4,
           start: float | None = None) -> tuple[np.ndarray, np.ndarray]:
    """A few cycles of the waveform: ``n_cycles`` periods from ``start`` (s from the record
    start), or the last ``n_cycles`` periods of the record when ``start`` is None.
    Without a fundamental, the last 1 % of the record (at least 200 samples)."""
    n = capture.n
    fs = capture.sample_rate
    if fundamental and fundamental > 0:
        length = int(math.ceil(n_cycles * fs / fundamental))
    else:
        length = max(200, n // 100)
    length = min(length, n)
    first = n - length if start is None else int(round(start * fs))
    first = min(max(first, 0), max(n - length, 0))
    idx = np.arange(first, first + length)
    return capture.start_time + idx / fs, capture.samples[first:first + length].copy()
