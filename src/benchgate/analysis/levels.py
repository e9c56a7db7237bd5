"""Levels of the steady part: amplitude (fitted), peak-to-peak, AC rms and DC offset."""

from __future__ import annotations

import math

import numpy as np

from benchgate.analysis._budget import no_oscillation_amplitude, settling, wander
from benchgate.analysis._robust import mad_of_differences_at_least
from benchgate.analysis._steady import NOT_STEADY, STILL_CHANGING
from benchgate.analysis.capture import Capture
from benchgate.analysis.context import (
    FEW_CYCLES,
    NO_OSCILLATION_SLOW,
    Context,
    get_context,
)
from benchgate.analysis.measurement import Measurement
from benchgate.analysis.uncertainty import crlb_amplitude_std, expand, quantisation_std

#: fewest cycles a DC offset is stated from when the tone has fewer than 3.
MIN_DC_CYCLES = 2.0


def _refuse(ctx: Context, name: str) -> str | None:
    """Why a level cannot be stated; a flat line still has levels (it is simply not moving)."""
    if ctx.fatal and not ctx.validation.flat:
        return ctx.fatal
    if ctx.validation.clipped:
        return ctx.validation.clipped
    if name in ("amplitude", "vpp", "rms") and ctx.steady.warning in (NOT_STEADY, STILL_CHANGING):
        return ctx.steady.warning
    return None


def _whole_cycles(ctx: Context) -> np.ndarray:
    bounds = ctx.cycle_bounds()
    if bounds is None:
        return ctx.y
    return ctx.y[: bounds[-1]]


def amplitude(capture: Capture, *, context: Context | None = None) -> Measurement:
    """Peak amplitude (V) of the fundamental from the four-parameter sine fit.

    Parameters
    ----------
    capture : Capture
        A periodic waveform (V); a flat or noise-only one gets an upper bound.
    context : Context, optional

    Returns
    -------
    Measurement
        √(A² + B²) of the fit on the steady part. U combines the Cramér–Rao term √(2σ²/N)
        (σ² from the fit residual) and the ADC resolution Q/√12 when the ADC is known.
        With no oscillation at all (a flat line, or noise below the detection threshold) it
        is a valid bound, ``details["no_oscillation"]`` set, so a dead unit fails an amplitude
        window. Invalid when the waveform is clipped or the tone cannot be trusted for another
        reason (fewer than 3 cycles, near Nyquist, no convergence).

    References
    ----------
    IEEE Std 1057-2017; Rife and Boorstyn (1974); JCGM 100:2008 F.2.2.1 (resolution).
    """
    ctx = get_context(capture, context)
    refused = _refuse(ctx, "amplitude")
    if not refused:
        bound = no_oscillation_amplitude(ctx, capture)
        if bound is not None:
            return bound
    tone = ctx.tone
    if refused or tone.fit is None:
        return Measurement.invalid("amplitude", "V", refused or tone.reason or "no tone")
    fit = tone.fit
    details = {"method": "four-parameter sine fit", "samples_used": fit.n}
    if not tone.ok:
        return Measurement.invalid("amplitude", "V", tone.reason, value=fit.amplitude, **details)
    stray = wander(ctx)
    if stray.reason:
        return Measurement.invalid("amplitude", "V", stray.reason, value=tone.amplitude, **details)
    value = tone.amplitude
    if tone.chirp is not None:
        details["method"] = "sine fit along the drifting phase (quadratic phase, IEEE 1057 three-parameter)"
        details["drift_hz_per_s"] = tone.track.drift
    settle = settling(ctx) * value
    if settle:
        details["settling_v"] = settle
    misfit = stray.relative * value
    if misfit:
        details["phase_misfit_v"] = misfit
    noise = max(tone.noise_var, tone.noise_floor) if math.isfinite(tone.noise_floor) else tone.noise_var
    u = expand(crlb_amplitude_std(noise, fit.n), quantisation_std(capture.adc), settle, misfit)
    return Measurement("amplitude", value, "V", u, details=details)


def vpp(capture: Capture, *, context: Context | None = None) -> Measurement:
    """Peak-to-peak voltage (V): mean of the per-cycle peak-to-peak values of the steady part,
    each peak refined by a three-point parabola.

    Returns
    -------
    Measurement
        With a trusted tone, the mean over whole cycles and a type A uncertainty (standard
        deviation of the mean, k = 2) plus the resolution of two readings and a rectangular
        bound for the peaks falling between samples (:func:`_sampling_bound`), plus, in full,
        the most noise can lift the per-cycle peaks (2σ√(2 ln M), M samples a cycle); without one, the
        span of the steady part with the resolution term only. Invalid when clipped.

    References
    ----------
    JCGM 100:2008, 4.2 (type A evaluation) and F.2.2.1 (resolution).
    """
    ctx = get_context(capture, context)
    refused = _refuse(ctx, "vpp")
    if refused:
        return Measurement.invalid("vpp", "V", refused)
    q = quantisation_std(capture.adc)
    bounds = ctx.cycle_bounds()
    y = ctx.y
    if bounds is None or bounds.size < 4:
        span = float(np.max(y) - np.min(y))
        return Measurement("vpp", span, "V", expand(q, q) if q else None,
                           details={"method": "span of the steady part"})
    starts = bounds[:-1]
    whole = y[: bounds[-1]]
    fit = ctx.tone.fit
    curv = 4.0 * fit.amplitude * fit.omega ** 2 if ctx.tone.ok and fit is not None else 0.0
    imax, imin = _cycle_extremes(whole, starts)
    ptp = _refined_peaks(y, imax, 1.0, curv) + _refined_peaks(y, imin, -1.0, curv)
    k = ptp.size
    u_a = float(np.std(ptp, ddof=1)) / math.sqrt(k) if k > 1 else 0.0
    u_s = _sampling_bound(ctx) / math.sqrt(3.0)
    # noise lifts each cycle's highest sample and lowers its lowest: max(s + n) ≤ max(s) + max(n),
    # and the mean of the largest of M Gaussian values of deviation σ is at most σ√(2 ln M)
    # (derived bound), so the per-cycle peak-to-peak is at most 2σ√(2 ln M) high on average;
    # that one-sided bound is added to U in full, not in quadrature
    m = max(float(np.mean(np.diff(bounds))), 2.0)
    noise_lift = 2.0 * _noise_sd(ctx) * math.sqrt(2.0 * math.log(m))
    return Measurement("vpp", float(np.mean(ptp)), "V", expand(u_a, q, q, u_s) + noise_lift,
                       details={"method": "mean per-cycle peak-to-peak, peaks interpolated",
                                "cycles": k, "sampling_bound_v": _sampling_bound(ctx),
                                "noise_lift_bound_v": noise_lift})


def _std(y: np.ndarray, chunk: int = 8192) -> float:
    """Population standard deviation (as numpy.std), the squared deviations summed a chunk at a
    time so no temporary the size of the capture is made (chunks under OpenBLAS's threading
    threshold for a dot product, 10 000, so no second thread is woken on a busy machine)."""
    if y.size == 0:
        return math.nan
    mean = float(y.mean())
    total = 0.0
    for first in range(0, y.size, chunk):
        d = y[first:first + chunk] - mean
        total += float(np.dot(d, d))
    return math.sqrt(total / y.size)


def _noise_sd(ctx: Context) -> float:
    """Standard deviation (V) of the noise on the steady part: the smaller of the sine fit's
    residual (which also holds a distorted waveform's harmonics) and a robust estimate from
    the first differences (1.4826·MAD/√2, which also holds a sine's slope), both upper bounds
    of the white noise (common practice, no source). The robust estimate is computed only when
    counting cannot show it is at least the fit's
    (:func:`~benchgate.analysis._robust.mad_of_differences_at_least`);
    the result is the same either way."""
    tone = ctx.tone
    fit = math.sqrt(tone.noise_var) if tone.fit is not None and math.isfinite(tone.noise_var) else math.inf
    if math.isfinite(fit) and mad_of_differences_at_least(ctx.y, fit * math.sqrt(2.0) / 1.4826 * (1.0 + 1e-12)):
        return fit
    d = np.diff(ctx.y)
    robust = 1.4826 * float(np.median(np.abs(d - np.median(d)))) / math.sqrt(2.0) if d.size else 0.0
    return min(robust, fit)


def _cycle_extremes(whole: np.ndarray, starts: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Index of the (first) largest and smallest sample of each cycle ``starts[i]:starts[i+1]``.

    The cycles differ in length by at most one sample, so one gather of the rows of a sliding
    window (cycles × longest), a short row's surplus sample replaced by its own first sample,
    serves both.
    """
    ends = np.r_[starts[1:], whole.size]
    lengths = ends - starts
    longest = int(np.max(lengths))
    inside = starts + longest <= whole.size  # rows whose window stays inside the samples
    rows = np.flatnonzero(inside)
    g = np.lib.stride_tricks.sliding_window_view(whole, longest)[starts[rows]]
    short = lengths[rows] < longest
    g[short, -1] = g[short, 0]  # (cycles differ by at most one sample)
    imax = np.empty(starts.size, dtype=np.int64)
    imin = np.empty(starts.size, dtype=np.int64)
    imax[rows] = starts[rows] + np.argmax(g, axis=1)
    imin[rows] = starts[rows] + np.argmin(g, axis=1)
    for i in np.flatnonzero(~inside):  # the last cycle, when its window would pass the end
        part = whole[starts[i]:ends[i]]
        imax[i] = starts[i] + int(np.argmax(part))
        imin[i] = starts[i] + int(np.argmin(part))
    return imax, imin


def _refined_peaks(y: np.ndarray, at: np.ndarray, sign: float, max_curvature: float) -> np.ndarray:
    """Per-cycle peak of ``sign·y`` at sample indices ``at``, refined by a parabola through the
    peak sample and its neighbours (vertex offset limited to ±½ sample; Gasior and Gonzalez
    2004 use the same three-point parabola for spectral peaks). A sampled sine's peak sample
    falls short of the peak by up to A(1 − cos(π/P)) for P samples per period; the parabola
    leaves far less.

    Only strict local maxima whose second difference is no sharper than ``max_curvature``
    (4·A·ω², four times a sine's own) are refined: the corner of a square wave's flat top
    next to its edge would otherwise overshoot by a large part of the step."""
    peaks = sign * y[at]
    inner = (at > 0) & (at < y.size - 1)
    i = at[inner]
    a, b, c = sign * y[i - 1], sign * y[i], sign * y[i + 1]
    den = a - 2.0 * b + c
    ok = (b > a) & (b > c) & (-den <= max_curvature)
    delta = np.clip(np.where(ok, (a - c) / np.where(ok, 2.0 * den, 1.0), 0.0), -0.5, 0.5)
    vertex = b + 0.5 * (c - a) * delta + 0.5 * den * delta * delta
    peaks[inner] = np.where(ok, np.maximum(vertex, b), b)
    return peaks


def _sampling_bound(ctx: Context) -> float:
    """Largest shortfall (V) of the interpolated per-cycle peak-to-peak of the fitted sine:
    2A·min(1 − cos(h/2), h⁴/24) with h = 2π/P (raw peak sample; parabola through three
    samples of a cosine, whose error stays below the quartic Taylor term — derived and
    checked numerically), 0 without a trusted fit."""
    tone = ctx.tone
    if not tone.ok or tone.fit is None:
        return 0.0
    h = tone.fit.omega
    return 2.0 * tone.fit.amplitude * min(1.0 - math.cos(0.5 * h), h ** 4 / 24.0)


def rms(capture: Capture, *, context: Context | None = None) -> Measurement:
    """AC rms voltage (V), DC removed, over the whole cycles of the steady part.

    Notes
    -----
    The fundamental's contribution is taken over exact whole periods (closed form), since
    the whole cycles used end on a whole sample.
    Standard uncertainty from the residual noise σ² of the fit: var(rms²) ≈ (4σ²S + 2σ⁴)/N
    with S the mean-square signal, so u(rms) = √var(rms²) / (2·rms) (derived, first order).
    """
    ctx = get_context(capture, context)
    refused = _refuse(ctx, "rms")
    if refused:
        return Measurement.invalid("rms", "V", refused)
    y = _whole_cycles(ctx)
    n = y.size
    value = _std(y)
    tone = ctx.tone
    if tone.ok and tone.fit is not None and value > 0:
        # the whole cycles end on a whole sample: take out the fundamental's share of the
        # left-over fraction of a period (as for dc_offset)
        value = math.sqrt(max(value * value - _sine_ms_excess(tone.fit, n), 0.0))
    details = {"samples_used": n, "whole_cycles": tone.ok}
    if value <= 0:
        return Measurement("rms", 0.0, "V", None, details=details)
    if tone.ok and tone.fit is not None:
        s2 = tone.fit.residual_var
        signal = max(value * value - s2, 0.0)
        var_ms = (4.0 * s2 * signal + 2.0 * s2 * s2) / n
        u = math.sqrt(var_ms) / (2.0 * value)
        settle = settling(ctx) * value
        if settle:
            details["settling_v"] = settle
        return Measurement("rms", value, "V", expand(u, quantisation_std(capture.adc) / math.sqrt(n), settle),
                           details=details)
    return Measurement("rms", value, "V", None, details=details)


def dc_offset(capture: Capture, *, context: Context | None = None) -> Measurement:
    """Mean (DC) voltage (V) over the whole cycles of the steady part.

    Notes
    -----
    The mean over the whole cycles of the steady part, less the fitted fundamental's own
    mean over those samples (the whole cycles end on a whole sample, so up to half a sample
    of a period is left over; at high SNR that bias would exceed U).
    u = √(σ²/N + Q²/12): the residual noise averaged over N samples, and the resolution.
    Without a trusted tone σ² is the sample variance.

    References
    ----------
    JCGM 100:2008, 4.2 and F.2.2.1.
    """
    ctx = get_context(capture, context)
    refused = _refuse(ctx, "dc_offset")
    if refused:
        return Measurement.invalid("dc_offset", "V", refused)
    tone = ctx.tone
    if tone.fit is not None and not tone.ok and (tone.reason == NO_OSCILLATION_SLOW
                                                  or tone.reason.startswith(FEW_CYCLES)):
        return _dc_of_few_cycles(ctx, capture)
    y = _whole_cycles(ctx)
    n = y.size
    value = float(np.mean(y))
    if tone.ok and tone.fit is not None:
        s2 = tone.fit.residual_var
        # whole cycles end on a whole sample, up to half a sample off the true period: the
        # fitted fundamental's own mean over the samples used is removed (closed form)
        value -= _sine_mean(tone.fit, n)
    else:
        s2 = float(np.var(y))
    u_float = 2.0 * np.finfo(float).eps * abs(value)  # the mean itself is rounded
    u = expand(math.sqrt(s2 / n), quantisation_std(capture.adc), u_float)
    return Measurement("dc_offset", value, "V", u, details={"samples_used": n})


def _dc_of_few_cycles(ctx: Context, capture: Capture) -> Measurement:
    """DC offset of a capture of fewer than 3 cycles: the four-parameter fit's offset with its
    least-squares standard uncertainty σ²·(JᵀJ)⁻¹ (J the fit's Jacobian at the solution; the
    offset is correlated with the phase and frequency when few cycles are fitted), or invalid
    under 2 cycles, where the mean of the capture depends on where it cuts the cycle (a Monte
    Carlo over phases covered the truth in about half the captures). Linear least squares,
    IEEE Std 1057-2017 four-parameter fit; JCGM 100:2008 for U."""
    tone = ctx.tone
    fit = tone.fit
    if tone.cycles < MIN_DC_CYCLES:
        return Measurement.invalid("dc_offset", "V", f"fewer than {MIN_DC_CYCLES:g} cycles in the capture "
                                   f"({tone.cycles:.2f}): the mean depends on where the capture cuts the cycle")
    n = fit.n
    t = np.arange(n) - (n - 1) / 2.0
    c, s = np.cos(fit.omega * t), np.sin(fit.omega * t)
    jac = np.stack([c, s, t * (fit.b * c - fit.a * s), np.ones(n)], axis=1)
    try:
        cov = np.linalg.inv(jac.T @ jac)
    except np.linalg.LinAlgError:
        return Measurement.invalid("dc_offset", "V", "the sine fit's offset is not determined")
    s2 = max(tone.noise_var, tone.noise_floor) if math.isfinite(tone.noise_floor) else tone.noise_var
    u = expand(math.sqrt(max(s2 * float(cov[3, 3]), 0.0)), quantisation_std(capture.adc))
    return Measurement("dc_offset", fit.offset, "V", u,
                       details={"samples_used": n, "method": "offset of the four-parameter sine fit",
                                "cycles": round(tone.cycles, 3)})


def _phasor_sum(w: float, m: int, n: int) -> complex:
    """Σ_{k<m} e^{iw·t_k} with t_k = k − (N−1)/2, by the geometric series
    e^{−iw(N−1)/2}·(e^{iwm} − 1)/(e^{iw} − 1) (derived)."""
    z = complex(math.cos(w), math.sin(w))
    if abs(z - 1.0) < 1e-15:
        total = complex(m, 0.0)
    else:
        total = (complex(math.cos(w * m), math.sin(w * m)) - 1.0) / (z - 1.0)
    c = 0.5 * (n - 1)
    return total * complex(math.cos(w * c), -math.sin(w * c))


def _sine_mean(fit, m: int) -> float:
    """Mean of the fitted a·cos(ωt) + b·sin(ωt) over the first ``m`` samples of the fit's capture
    (t centred on the fit's capture, as in :mod:`benchgate.analysis.sinefit`)."""
    if m < 1:
        return 0.0
    total = _phasor_sum(fit.omega, m, fit.n)
    return (fit.a * total.real + fit.b * total.imag) / m


def _sine_ms_excess(fit, m: int) -> float:
    """How much the fitted sine's mean square about its own mean over the first ``m`` samples
    exceeds A²/2, its value over exact whole periods: with cos² = (1 + cos 2ωt)/2,
    sin² = (1 − cos 2ωt)/2 and cos·sin = sin(2ωt)/2, Σ(a cos + b sin)² = (a² + b²)m/2 +
    (a² − b²)/2·Re S₂ + ab·Im S₂, S₂ = Σe^{2iωt} (derived)."""
    if m < 1:
        return 0.0
    s2 = _phasor_sum(2.0 * fit.omega, m, fit.n)
    a, b = fit.a, fit.b
    sum_sq = 0.5 * (a * a + b * b) * m + 0.5 * (a * a - b * b) * s2.real + a * b * s2.imag
    mean = _sine_mean(fit, m)
    return sum_sq / m - mean * mean - 0.5 * (a * a + b * b)
