"""The one place capture samples are validated before measuring.

Returns warnings (shown with the capture) and, when nothing can be measured at all, a
fatal reason that every measurement repeats. Clipping is reported separately because it
spoils levels and distortion but not frequency or timing.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from benchgate.analysis import sinefit, spectrum
from benchgate.analysis.capture import AdcInfo, Capture

#: fewest samples any measurement is attempted on.
MIN_SAMPLES = 16
#: largest magnitude accepted as a voltage (beyond it the arithmetic would overflow).
MAX_ABS = 1e100


@dataclass(frozen=True)
class Validation:
    """Outcome of :func:`validate_capture`."""

    fatal: str | None
    warnings: tuple[str, ...]
    clipped: str | None  # reason text when the waveform is clipped or flat-topped
    pulse_like: bool
    low_state: float
    high_state: float
    flat: bool = False  # a flat line: levels can still be stated, nothing periodic can


#: samples binned at a time (the temporaries stay in the processor's cache).
_HISTOGRAM_CHUNK = 65536


def _histogram(x: np.ndarray, lo: float, hi: float, bins: int) -> np.ndarray:
    scale = bins / (hi - lo)
    counts = np.zeros(bins, dtype=np.int64)
    for first in range(0, x.size, _HISTOGRAM_CHUNK):
        scaled = x[first:first + _HISTOGRAM_CHUNK] - lo
        scaled *= scale
        idx = scaled.astype(np.intp)
        np.minimum(idx, bins - 1, out=idx)
        counts += np.bincount(idx, minlength=bins)
    return counts


def state_levels(x: np.ndarray, bins: int = 256) -> tuple[float, float]:
    """Low and high state levels: modes of the lower and upper halves of the histogram.

    References
    ----------
    IEEE Std 181-2011, state levels by the histogram method.
    """
    return _levels_and_counts(x, bins)[:2]


def _levels_and_counts(x: np.ndarray, bins: int = 256, *, lo: float | None = None,
                       hi: float | None = None) -> tuple[float, float, np.ndarray | None]:
    """State levels and the histogram counts; ``lo``/``hi`` are min(x) and max(x) when known."""
    lo = float(np.min(x)) if lo is None else lo
    hi = float(np.max(x)) if hi is None else hi
    if hi <= lo:
        return lo, hi, None
    counts = _histogram(x, lo, hi, bins)
    width = (hi - lo) / bins
    half = bins // 2
    low = lo + (int(np.argmax(counts[:half])) + 0.5) * width
    high = lo + (half + int(np.argmax(counts[half:])) + 0.5) * width
    return float(low), float(high), counts


def is_pulse_like(x: np.ndarray, low: float, high: float) -> bool:
    """True when most samples sit near one of two state levels (a square wave or pulse train)."""
    span = high - low
    if span <= 0:
        return False
    near = (np.abs(x - low) < 0.1 * span) | (np.abs(x - high) < 0.1 * span)
    return bool(np.mean(near) >= 0.8)


def _pulse_like_from_counts(counts: np.ndarray, lo: float, hi: float, low: float, high: float) -> bool:
    """:func:`is_pulse_like` from the state-level histogram (to one bin of resolution)."""
    span = high - low
    if span <= 0:
        return False
    bins = counts.size
    centres = lo + (np.arange(bins) + 0.5) * ((hi - lo) / bins)
    near = (np.abs(centres - low) < 0.1 * span) | (np.abs(centres - high) < 0.1 * span)
    return bool(counts[near].sum() >= 0.8 * counts.sum())


def _run_fraction(mask: np.ndarray) -> float:
    """Fraction of samples inside runs of at least 3 consecutive True values."""
    if mask.size < 3:
        return 0.0
    inner = mask[:-2] & mask[1:-1] & mask[2:]
    return float(np.count_nonzero(inner)) / mask.size


def _rail_clipping(x: np.ndarray, adc: AdcInfo, low_mask: np.ndarray, high_mask: np.ndarray) -> str | None:
    """Whether samples at the end codes mean clipping, or are what an unclipped sine gives.

    A sine whose peaks just reach the top code puts a predictable share of its samples there:
    a sine of amplitude A is above a level A − d for a fraction arccos(1 − d/A)/π of the time
    (its arcsine amplitude distribution, the reasoning of the IEEE 1241 histogram test). The
    sine is not clipped while its peak stays inside the end code's own width (d ≤ 1 LSB from
    the code's transition level), so at most N·arccos(1 − (Q + 3σ)/A)/π samples sit at each end
    code (σ the noise, which may carry a peak a little further), plus a binomial allowance of
    three standard deviations and two samples. A and the offset come from a three-parameter
    sine fit (at the four-parameter fit's frequency) to the samples strictly inside the rails,
    so a clipped sine's true, larger amplitude is recovered. More samples at a rail than that
    is clipping. Returns the reason, or None.

    References
    ----------
    IEEE Std 1241-2010, histogram (code density) test with a sine input (arcsine distribution);
    IEEE Std 1057-2017, sine fits.
    """
    inner = ~(low_mask | high_mask)
    n = x.size
    both = " and ".join(name for name, m in (("low", low_mask), ("high", high_mask)) if np.count_nonzero(m) >= 2)
    plain = f"clipped at the ADC {both} rail ({int(np.count_nonzero(~inner))} samples)"
    if np.count_nonzero(inner) < 16:
        return plain
    f0 = spectrum.coarse_frequency(x, 1.0)
    if not 0.0 < f0 < 0.5:
        return plain
    omega = sinefit.fit4(x, 2.0 * np.pi * f0).omega
    t = np.arange(n) - (n - 1) / 2.0
    cols = np.stack([np.cos(omega * t), np.sin(omega * t), np.ones(n)], axis=1)[inner]
    coef, *_ = np.linalg.lstsq(cols, x[inner], rcond=None)
    amp = float(np.hypot(coef[0], coef[1]))
    resid = x[inner] - cols @ coef
    noise = float(np.sqrt(max(float(np.mean(resid * resid)) - adc.lsb ** 2 / 12.0, 0.0)))
    if not amp > 0:
        return plain
    reach = adc.lsb + 3.0 * noise
    worst = n * float(np.arccos(np.clip(1.0 - reach / amp, -1.0, 1.0))) / np.pi
    allowed = worst + 3.0 * np.sqrt(worst) + 2.0
    sides = []
    for name, mask in (("low", low_mask), ("high", high_mask)):
        count = int(np.count_nonzero(mask))
        if count < 2:
            continue
        if count > allowed:
            sides.append(name)
    if not sides:
        return None
    total = int(sum(np.count_nonzero(m) for m in (low_mask, high_mask)))
    return (f"clipped at the ADC {' and '.join(sides)} rail ({total} samples; a sine reaching "
            f"the end code without clipping would put at most {int(allowed)} there)")


def validate_capture(capture: Capture) -> Validation:
    """Validate a capture's samples: count, finiteness, flat line, clipping or flat tops."""
    x = capture.samples
    warnings: list[str] = []
    if x.size < MIN_SAMPLES:
        reason = f"too few samples ({x.size}; at least {MIN_SAMPLES} needed)"
        return Validation(reason, (reason,), None, False, np.nan, np.nan)
    lo, hi = float(np.min(x)), float(np.max(x))
    if not (np.isfinite(lo) and np.isfinite(hi)):  # min and max are NaN or ±inf if any sample is
        bad = int(np.count_nonzero(~np.isfinite(x)))
        reason = f"{bad} NaN or infinite sample(s) in the capture"
        return Validation(reason, (reason,), None, False, np.nan, np.nan)
    if max(abs(lo), abs(hi)) > MAX_ABS:
        reason = f"samples out of range (beyond ±{MAX_ABS:g} V): not a voltage capture"
        return Validation(reason, (reason,), None, False, lo, hi)
    span = hi - lo
    scale = max(abs(lo), abs(hi), 1e-300)
    flat_limit = 2.0 * capture.adc.lsb if capture.adc is not None else 1e-9 * scale
    if span <= flat_limit:
        reason = "flat line: no oscillation in the capture"
        return Validation(reason, (reason,), None, False, lo, hi, flat=True)
    low, high, counts = _levels_and_counts(x, lo=lo, hi=hi)
    pulse = counts is not None and _pulse_like_from_counts(counts, lo, hi, low, high)
    clipped = None
    if capture.adc is not None:
        adc = capture.adc
        tol = 0.5 * adc.lsb
        low_mask = x <= adc.low_rail + tol
        high_mask = x >= adc.high_rail - tol
        at_low = int(np.count_nonzero(low_mask))
        at_high = int(np.count_nonzero(high_mask))
        if at_low >= 2 or at_high >= 2:
            where = " and ".join(name for name, count in (("low", at_low), ("high", at_high)) if count >= 2)
            if pulse:
                warnings.append(f"a pulse state sits at the ADC {where} rail; its level may be limited")
            else:
                clipped = _rail_clipping(x, adc, low_mask, high_mask)
    elif not pulse:
        tol = 1e-9 * span
        frac = max(_run_fraction(x >= hi - tol), _run_fraction(x <= lo + tol))
        if frac >= 0.03:
            clipped = f"flat tops: {100 * frac:.1f} % of samples sit in runs at one extreme (clipping?)"
    if clipped:
        warnings.append(clipped)
    return Validation(None, tuple(warnings), clipped, pulse, low, high)
