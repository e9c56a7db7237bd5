"""Frequency drift: slope of the frequency over successive segments of the steady part."""

from __future__ import annotations

import math

from benchgate.analysis._track import MIN_SEGMENTS, segment_phases
from benchgate.analysis.capture import Capture
from benchgate.analysis.context import Context, get_context
from benchgate.analysis.measurement import Measurement
from benchgate.analysis.uncertainty import clock_std, expand

__all__ = ["frequency_drift", "segment_phases"]


def frequency_drift(capture: Capture, *, context: Context | None = None) -> Measurement:
    """Slope (Hz/s) of the frequency over the steady part.

    Parameters
    ----------
    capture : Capture
        A tone (V) with at least 8 cycles in its steady part.
    context : Context, optional

    Returns
    -------
    Measurement
        Invalid without a trusted tone, with fewer than 8 cycles (4 segments of 2 cycles), or
        when the segment phases cannot be unwrapped (more than π/4 between neighbours).

    Notes
    -----
    The steady part is cut into 4 to 16 equal segments (more, up to 1024, when the phase
    turns by more than π/4 between neighbouring segments); a three-parameter fit at the fitted
    frequency gives each segment's phase; a least-squares quadratic φ(t) = p₀ + p₁t + p₂t²
    gives the drift df/dt = p₂/π. The phase noise used for U is the larger of the
    regression residual and the Cramér–Rao phase term √(2σ²/(M·A²)) per segment of M samples.

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
                                   f"fewer than {2 * MIN_SEGMENTS} cycles in the steady part")
    if not track.followed:
        # neighbouring segment phases more than π/4 apart (turning or scattered): unwrapping
        # them by the nearest multiple of 2π can no longer be trusted
        return Measurement.invalid(
            "frequency_drift", "Hz/s", "the phase cannot be followed from segment to segment "
            f"(frequency changing too fast or too noisy; phase residual {track.residual:.2f} rad)",
            value=track.drift, segments=track.segments)
    value = track.drift
    u = math.sqrt(float(track.cov[2, 2])) / math.pi
    details = {"segments": track.segments, "segment_s": track.segment_s,
               "phase_noise_rad": max(track.residual, track.noise)}
    return Measurement("frequency_drift", value, "Hz/s", expand(u, clock_std(value, capture.clock_ppm)),
                       details=details)
