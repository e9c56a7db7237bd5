"""Frequency of the fundamental: interpolated tapered DFT, refined by the IEEE 1057 fit."""

from __future__ import annotations

import math

from benchgate.analysis.capture import Capture
from benchgate.analysis.context import Context, get_context
from benchgate.analysis.measurement import Measurement
from benchgate.analysis.uncertainty import clock_std, crlb_frequency_std, expand


def frequency(capture: Capture, *, context: Context | None = None) -> Measurement:
    """Frequency of the fundamental of the steady part of a capture.

    Parameters
    ----------
    capture : Capture
        The capture (V).
    context : Context, optional
        Shared intermediate results (from :func:`benchgate.analysis.analyze`).

    Returns
    -------
    Measurement
        ``frequency`` in Hz with expanded uncertainty U (k = 2). Invalid, with a reason, for a
        flat or noise-only capture, fewer than 3 cycles, a fundamental above 0.45·fs, or a fit
        that did not converge.

    Notes
    -----
    The start is the interpolated peak of a tapered DFT (Hann zero-padded for short
    captures, Blackman–Harris for long ones; a small grid of three-parameter fits for captures
    under 20 cycles), refined by the four-parameter least-squares fit on the steady part
    (after start-up). The standard uncertainty combines the Cramér–Rao bound evaluated with
    the fit's amplitude and the noise at the tone's frequency (the larger of the residual
    variance and the local floor used for detection, so coloured noise is not taken for
    white), and the sample-clock tolerance (rectangular). When the frequency drifts
    significantly, the value is the frequency at the middle of the capture from the tracked
    phase (:mod:`benchgate.analysis._track`), the mean over the capture for a linear drift.

    References
    ----------
    IEEE Std 1057-2017, four-parameter sine fit. D. C. Rife and R. R. Boorstyn, IEEE Trans.
    Inf. Theory 20(5), 1974 (Cramér–Rao bound). JCGM 100:2008 (GUM), k = 2.
    """
    ctx = get_context(capture, context)
    tone = ctx.tone
    if tone.fit is None:
        return Measurement.invalid("frequency", "Hz", tone.reason or "no tone")
    fit = tone.fit
    fs = capture.sample_rate
    # η from the noise at the tone's own frequency: with coloured noise the local density,
    # not the capture's average, sets how well the frequency is known
    noise = max(tone.noise_var, tone.noise_floor) if math.isfinite(tone.noise_floor) else tone.noise_var
    eta = tone.amplitude ** 2 / (2.0 * noise) if noise > 0 else math.inf
    u_fit = crlb_frequency_std(eta, fit.n) * fs
    u_clock = clock_std(tone.frequency, capture.clock_ppm)
    details = {"method": "four-parameter sine fit", "samples_used": fit.n,
               "steady_start_s": ctx.steady_start_time, "cycles": round(tone.cycles, 3),
               "iterations": fit.iterations, "u_fit_hz": u_fit, "u_clock_hz": u_clock}
    if not tone.ok:
        return Measurement.invalid("frequency", "Hz", tone.reason, value=tone.frequency, **details)
    if not math.isfinite(u_fit):
        return Measurement.invalid("frequency", "Hz", "no noise estimate for the uncertainty",
                                   value=tone.frequency, **details)
    value = tone.frequency
    if tone.chirp is not None and tone.track is not None:
        # a significant drift: the fixed-frequency fit settles on no particular instant, the
        # tracked phase gives the frequency at the middle of the capture (the mean over the
        # capture for a linear drift) and its own least-squares uncertainty
        value = tone.frequency + float(tone.track.coef[1]) / (2.0 * math.pi)
        u_fit = math.hypot(u_fit, math.sqrt(max(float(tone.track.cov[1, 1]), 0.0)) / (2.0 * math.pi))
        details.update(method="phase tracked over the capture (linear drift), frequency at its middle",
                       u_fit_hz=u_fit, drift_hz_per_s=tone.track.drift)
    return Measurement("frequency", value, "Hz", expand(u_fit, clock_std(value, capture.clock_ppm)),
                       details=details)
