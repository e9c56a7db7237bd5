"""Frequency drift: slope of the frequency over successive windows of the steady part."""

from __future__ import annotations

import math

from benchgate.analysis._track import MIN_WINDOWS, window_phases
from benchgate.analysis.capture import Capture
from benchgate.analysis.context import Context, get_context
from benchgate.analysis.measurement import Measurement
from benchgate.analysis.uncertainty import clock_std, expand

__all__ = ["frequency_drift", "window_phases"]


def frequency_drift(capture: Capture, *, context: Context | None = None) -> Measurement:
    """Slope (Hz/s) of the frequency over the steady part.

    Parameters
    ----------
    capture : Capture
    context : Context, optional

    Returns
    -------
    Measurement
        Invalid without a trusted tone, with fewer than 8 cycles (4 windows of 2 cycles), or
        when the window phases cannot be unwrapped (more than π/4 between neighbours).

    Notes
    -----
    The steady part is cut into 4 to 16 equal windows (more, up to 1024, when the phase
    turns by more than π/4 between neighbouring windows); a three-parameter fit at the fitted
    frequency gives each window's phase; a least-squares quadratic φ(t) = p₀ + p₁t + p₂t²
    gives the drift df/dt = p₂/π. The phase noise used for U is the larger of the
    regression residual and the Cramér–Rao phase term √(2σ²/(M·A²)) per window of M samples.

    References
    ----------
    IEEE Std 1057-2017 (three-parameter fit); Kay (1993) for the phase variance; linear
    least squares with its covariance, JCGM 100:2008 for the budget.
    """
    ctx = get_context(capture, context)
    tone = ctx.tone
    if not tone.ok or tone.fit is None:
        return Measurement.invalid("frequency_drift", "Hz/s", tone.reason or "no tone")
    track = ctx.phase_track
    if track is None:
        return Measurement.invalid("frequency_drift", "Hz/s",
                                   f"fewer than {2 * MIN_WINDOWS} cycles in the steady part")
    if not track.followed:
        # neighbouring window phases more than π/4 apart (turning or scattered): unwrapping
        # them by the nearest multiple of 2π can no longer be trusted
        return Measurement.invalid(
            "frequency_drift", "Hz/s", "the phase cannot be followed from window to window "
            f"(frequency changing too fast or too noisy; phase residual {track.residual:.2f} rad)",
            value=track.drift, windows=track.windows)
    value = track.drift
    u = math.sqrt(float(track.cov[2, 2])) / math.pi
    details = {"windows": track.windows, "window_s": track.window_s,
               "phase_noise_rad": max(track.residual, track.noise)}
    return Measurement("frequency_drift", value, "Hz/s", expand(u, clock_std(value, capture.clock_ppm)),
                       details=details)
