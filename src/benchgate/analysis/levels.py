"""Levels of the steady part: amplitude (fitted), peak-to-peak, AC rms and DC offset."""

from __future__ import annotations

import math

import numpy as np

from benchgate.analysis._steady import NOT_STEADY, STILL_CHANGING
from benchgate.analysis.capture import Capture
from benchgate.analysis.context import (
    NO_OSCILLATION,
    NO_TONE,
    Context,
    detection_threshold,
    get_context,
)
from benchgate.analysis.measurement import Measurement
from benchgate.analysis.uncertainty import crlb_amplitude_std, expand, quantisation_std


def _refuse(ctx: Context, name: str) -> str | None:
    """Why a level cannot be stated; a flat line still has levels (it is simply not moving)."""
    if ctx.fatal and not ctx.checked.flat:
        return ctx.fatal
    if ctx.checked.clipped:
        return ctx.checked.clipped
    if name in ("amplitude", "vpp", "rms") and ctx.steady.warning in (NOT_STEADY, STILL_CHANGING):
        return ctx.steady.warning
    return None


def _no_oscillation_amplitude(ctx: Context, capture: Capture) -> Measurement | None:
    """A valid upper bound for the amplitude of a record with no oscillation, or None.

    A flat line, or a steady part that is flat or only drifts (nothing faster than one cycle
    per record, e.g. an oscillation that died out), bounds the amplitude by half the span.
    A record whose fit did not pass the detection test (noise only) bounds it by twice the
    amplitude that test would have detected, √(4σ²T/N) with T its threshold. A dead unit
    then fails an amplitude window instead of being left undecided.
    """
    q = quantisation_std(capture.adc)
    if ctx.checked.flat:
        half = 0.5 * float(np.ptp(capture.samples))
        return Measurement("amplitude", half, "V", half + expand(q),
                           details={"method": "bound: flat line", "no_oscillation": True})
    tone = ctx.tone
    if tone.reason not in NO_OSCILLATION:
        return None
    fit = tone.fit
    if tone.reason != NO_TONE or fit is None:
        half = 0.5 * float(np.ptp(ctx.y))
        return Measurement("amplitude", 0.0, "V", half + expand(q),
                           details={"method": "bound: half the span of the steady part",
                                    "no_oscillation": True})
    detectable = math.sqrt(4.0 * fit.residual_var * detection_threshold(fit.n) / fit.n)
    u = max(fit.amplitude, 2.0 * detectable) + expand(q)
    return Measurement("amplitude", fit.amplitude, "V", u,
                       details={"method": "bound: no tone above the noise", "no_oscillation": True,
                                "detectable_v": detectable})


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
    context : Context, optional

    Returns
    -------
    Measurement
        √(A² + B²) of the fit on the steady part. U combines the Cramér–Rao term √(2σ²/N)
        (σ² from the fit residual) and the ADC resolution Q/√12 when the ADC is known.
        With no oscillation at all (a flat line, or noise that fails the detection test) it
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
        bound = _no_oscillation_amplitude(ctx, capture)
        if bound is not None:
            return bound
    tone = ctx.tone
    if refused or tone.fit is None:
        return Measurement.invalid("amplitude", "V", refused or tone.reason or "no tone")
    fit = tone.fit
    details = {"method": "four-parameter sine fit", "samples_used": fit.n}
    if not tone.ok:
        return Measurement.invalid("amplitude", "V", tone.reason, value=fit.amplitude, **details)
    u = expand(crlb_amplitude_std(fit.residual_var, fit.n), quantisation_std(capture.adc))
    return Measurement("amplitude", fit.amplitude, "V", u, details=details)


def vpp(capture: Capture, *, context: Context | None = None) -> Measurement:
    """Peak-to-peak voltage (V): mean of the per-cycle peak-to-peak values of the steady part.

    Returns
    -------
    Measurement
        With a trusted tone, the mean over whole cycles and a type A uncertainty (standard
        deviation of the mean, k = 2) plus the resolution of two readings; without one, the
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
    ptp = np.maximum.reduceat(whole, starts) - np.minimum.reduceat(whole, starts)
    k = ptp.size
    u_a = float(np.std(ptp, ddof=1)) / math.sqrt(k) if k > 1 else 0.0
    return Measurement("vpp", float(np.mean(ptp)), "V", expand(u_a, q, q),
                       details={"method": "mean per-cycle peak-to-peak", "cycles": k})


def rms(capture: Capture, *, context: Context | None = None) -> Measurement:
    """AC rms voltage (V), DC removed, over the whole cycles of the steady part.

    Notes
    -----
    Standard uncertainty from the residual noise σ² of the fit: var(rms²) ≈ (4σ²S + 2σ⁴)/N
    with S the mean-square signal, so u(rms) = √var(rms²) / (2·rms) (derived, first order).
    """
    ctx = get_context(capture, context)
    refused = _refuse(ctx, "rms")
    if refused:
        return Measurement.invalid("rms", "V", refused)
    y = _whole_cycles(ctx)
    n = y.size
    value = float(np.std(y))
    tone = ctx.tone
    details = {"samples_used": n, "whole_cycles": tone.ok}
    if value <= 0:
        return Measurement("rms", 0.0, "V", None, details=details)
    if tone.ok and tone.fit is not None:
        s2 = tone.fit.residual_var
        signal = max(value * value - s2, 0.0)
        var_ms = (4.0 * s2 * signal + 2.0 * s2 * s2) / n
        u = math.sqrt(var_ms) / (2.0 * value)
        return Measurement("rms", value, "V", expand(u, quantisation_std(capture.adc) / math.sqrt(n)),
                           details=details)
    return Measurement("rms", value, "V", None, details=details)


def dc_offset(capture: Capture, *, context: Context | None = None) -> Measurement:
    """Mean (DC) voltage (V) over the whole cycles of the steady part.

    Notes
    -----
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
    y = _whole_cycles(ctx)
    n = y.size
    tone = ctx.tone
    s2 = tone.fit.residual_var if tone.ok and tone.fit is not None else float(np.var(y))
    u = expand(math.sqrt(s2 / n), quantisation_std(capture.adc))
    return Measurement("dc_offset", float(np.mean(y)), "V", u, details={"samples_used": n})
