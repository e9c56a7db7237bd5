"""Plot data for reports (pure functions, no plotting): spectrum, envelope, a few cycles.

:func:`capture_views` gathers them, with the fundamental, harmonics, steady part and start-up
instant, into one :class:`CaptureViews` computed from the same analysis context as the
measurements (``analyze(..., views=True)``), so a report draws what was judged without
analyzing the capture a second time. A view is small (a few thousand points at most) and is
kept in the run record.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any

import numpy as np

from benchgate.analysis.capture import Capture
from benchgate.analysis.spectrum import Spectrum, power_spectrum

if TYPE_CHECKING:
    from benchgate.analysis.context import Context

#: how many cycles of waveform a view keeps.
VIEW_CYCLES = 4
#: most points of the envelope and of the spectrum kept in a view.
ENVELOPE_POINTS = 600
SPECTRUM_POINTS = 1024  # a report's plot is 640 px wide; the reduction keeps every peak


def spectrum_db(capture: Capture, *, steady_start: float = 0.0,
                max_points: int = 2048) -> tuple[np.ndarray, np.ndarray]:
    """Blackman–Harris power spectrum of the capture from ``steady_start`` (s) on, in dB
    relative to its largest bin (the fundamental), reduced to at most ``max_points`` points
    by keeping the largest bin of each group (peaks survive the reduction).

    Returns empty arrays when fewer than 16 finite samples remain.
    """
    start = max(0, int(round((steady_start - 0.0) * capture.sample_rate)))
    x = capture.samples[start:]
    if x.size < 16 or not np.all(np.isfinite(x)):
        return np.zeros(0), np.zeros(0)
    return spectrum_levels(power_spectrum(x, capture.sample_rate, "blackmanharris"), max_points)


def spectrum_levels(spec: Spectrum, max_points: int = 2048) -> tuple[np.ndarray, np.ndarray]:
    """A computed spectrum in dB relative to its largest bin, reduced as :func:`spectrum_db` does."""
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
    """Min/max per bucket over the whole capture: (bucket start times s, low V, high V)."""
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
    """A few cycles of the waveform: ``n_cycles`` periods from ``start`` (s from the capture
    start), or the last ``n_cycles`` periods of the capture when ``start`` is None.
    Without a fundamental, the last 1 % of the capture (at least 200 samples)."""
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


def _floats(a: Any) -> np.ndarray:
    return np.asarray(a, dtype=float).reshape(-1)


@dataclass(frozen=True, eq=False)
class CaptureViews:
    """What a report draws of one capture, from the analysis the checks were judged on.

    Times are seconds from the capture start; voltages in V; ``spectrum_db`` in dB relative to
    the largest bin (the fundamental when there is one); ``harmonics`` holds ``(order,
    frequency Hz, level dBc)``. ``fundamental`` and ``startup`` are None when not found.
    ``full_scale`` is the converter's range (V), or None, for the least span a plot draws.
    """

    fundamental: float | None
    steady_start: float
    startup: float | None
    harmonics: tuple[tuple[int, float, float], ...]
    cycles_t: np.ndarray
    cycles_v: np.ndarray
    envelope_t: np.ndarray
    envelope_low: np.ndarray
    envelope_high: np.ndarray
    spectrum_f: np.ndarray
    spectrum_db: np.ndarray
    full_scale: float | None = None

    def to_dict(self) -> dict[str, Any]:
        """JSON-safe form, read back by :meth:`from_dict`: NaN as None, times and frequencies
        to 6 significant digits, voltages to 5 and levels to 0.01 dB (finer than any plot shows)."""

        def arr(a: np.ndarray, digits: int = 6) -> list[float | None]:
            return [float(f"{x:.{digits}g}") if math.isfinite(x) else None for x in a.tolist()]

        def db(a: np.ndarray) -> list[float | None]:
            return [round(x, 2) if math.isfinite(x) else None for x in a.tolist()]

        def num(x: float | None) -> float | None:
            return None if x is None or not math.isfinite(x) else float(x)

        return {
            "fundamental": num(self.fundamental), "steady_start": num(self.steady_start),
            "startup": num(self.startup), "full_scale": num(self.full_scale),
            "harmonics": [[int(o), float(f"{f:.6g}"), float(f"{d:.4g}")] for o, f, d in self.harmonics
                          if math.isfinite(f) and math.isfinite(d)],
            "cycles": {"t": arr(self.cycles_t), "v": arr(self.cycles_v, 5)},
            "envelope": {"t": arr(self.envelope_t), "low": arr(self.envelope_low, 5),
                         "high": arr(self.envelope_high, 5)},
            "spectrum": {"f": arr(self.spectrum_f), "db": db(self.spectrum_db)},
        }

    @classmethod
    def from_dict(cls, d: Mapping[str, Any]) -> CaptureViews:
        def arr(part: str, key: str) -> np.ndarray:
            values = (d.get(part) or {}).get(key) or []
            return np.array([math.nan if v is None else float(v) for v in values], dtype=float)

        def num(key: str) -> float | None:
            v = d.get(key)
            return None if v is None else float(v)

        return cls(fundamental=num("fundamental"), steady_start=num("steady_start") or 0.0,
                   startup=num("startup"),
                   harmonics=tuple((int(o), float(f), float(db)) for o, f, db in d.get("harmonics") or ()),
                   cycles_t=arr("cycles", "t"), cycles_v=arr("cycles", "v"),
                   envelope_t=arr("envelope", "t"), envelope_low=arr("envelope", "low"),
                   envelope_high=arr("envelope", "high"),
                   spectrum_f=arr("spectrum", "f"), spectrum_db=arr("spectrum", "db"),
                   full_scale=num("full_scale"))


def capture_views(capture: Capture, context: Context, *, startup: float | None = None) -> CaptureViews:
    """The views of ``capture`` from its analysis ``context`` (shared tone fit and spectrum).

    Parameters
    ----------
    capture : Capture
    context : Context
        The context the measurements were computed with; its tone, steady part and spectrum
        are reused, not recomputed.
    startup : float, optional
        The start-up time (s) measured on this capture, when one was.
    """
    from benchgate.analysis.distortion import harmonic_analysis, levels_dbc

    tone = context.tone
    fundamental = float(tone.frequency) if tone.ok else None
    harmonics = tuple(levels_dbc(harmonic_analysis(context))) if tone.ok else ()
    steady = float(context.steady_start_time)
    t, v = cycles(capture, fundamental, n_cycles=VIEW_CYCLES)
    # each min/max bucket must span a couple of cycles, or the band shows the waveform
    points = ENVELOPE_POINTS if not fundamental else int(
        min(ENVELOPE_POINTS, max(40, capture.duration * fundamental / 2)))
    et, lo, hi = envelope(capture, points=points)
    if context.fatal or context.y.size < 16 or not np.all(np.isfinite(context.y)):
        f, db = np.zeros(0), np.zeros(0)
    else:
        f, db = spectrum_levels(context.spectrum, SPECTRUM_POINTS)
    return CaptureViews(
        fundamental=fundamental, steady_start=steady, startup=startup,
        harmonics=tuple((int(o), float(fr), float(d)) for o, fr, d in harmonics),
        cycles_t=_floats(t) - capture.start_time, cycles_v=_floats(v),
        envelope_t=_floats(et) - capture.start_time, envelope_low=_floats(lo), envelope_high=_floats(hi),
        spectrum_f=_floats(f), spectrum_db=_floats(db),
        full_scale=capture.adc.full_scale if capture.adc is not None else None)
