"""Start-up: time from the start of the capture (or the recorded power-on instant) until the
oscillation is established."""

from __future__ import annotations

import math

from benchgate.analysis.capture import Capture
from benchgate.analysis.context import Context, get_context
from benchgate.analysis.measurement import Measurement
from benchgate.analysis.uncertainty import clock_std, expand


def startup_time(capture: Capture, *, context: Context | None = None) -> Measurement:
    """Time (s) from the first sample until the envelope first reaches 90 % of its steady amplitude.

    When the capture began before the unit was powered (a start-up capture), the runner stores
    the power-on instant in the capture's metadata: ``power_on_at`` (s from the first sample)
    and ``power_on_halfwidth`` (s, half the interval within which the switch-on happened). The
    time is then measured from that instant instead of the first sample, and the half-width
    enters the budget as a rectangular bound.

    Parameters
    ----------
    capture : Capture
        An oscillation (V) from before power-on, ``power_on_at`` in its metadata when known.
    context : Context, optional

    Returns
    -------
    Measurement
        0 when the capture already starts at the steady amplitude. Invalid when there is no
        oscillation, when the amplitude is still changing at the end of the capture (no steady
        part to refer to), or when the capture is shorter than 8 cycles.

    Notes
    -----
    The envelope is √2 times the sliding standard deviation over one period (local mean
    removed), the steady amplitude its median over the last quarter of the capture. In noise
    the envelope is first averaged over enough periods (centred) that a noise excursion
    cannot cross early; the crossing is interpolated between envelope points. U (k = 2)
    combines a rectangular half-period resolution of the one-period envelope, the remaining
    envelope noise divided by the envelope's slope at the crossing, and the clock tolerance.

    References
    ----------
    IEEE Std 181-2011: reference level crossing by linear interpolation, and settling to a band
    around the final state (from memory), applied to the envelope; the 90 % reference level as
    for a transition's 10 %–90 % duration. Envelope by sliding rms, common practice.
    JCGM 100:2008 for the budget. See docs/references.md.
    """
    ctx = get_context(capture, context)
    if (problem := ctx.oscillation_problem) is not None:
        return Measurement.invalid("startup_time", "s", problem)
    tone = ctx.tone
    steady = ctx.steady
    fs = capture.sample_rate
    if capture.n * tone.frequency / fs < 8:
        return Measurement.invalid("startup_time", "s", "capture shorter than 8 cycles: no start-up to see")
    if steady.growing:
        return Measurement.invalid("startup_time", "s", "amplitude still changing at the end of the capture")
    if steady.startup_index is None:
        return Measurement.invalid("startup_time", "s", "envelope never reaches 90 % of its steady amplitude")
    value = 0.0 if steady.startup_index == 0.0 else steady.startup_index / fs
    origin, u_origin = _power_on(capture)
    if origin is not None:
        if not (math.isfinite(origin) and 0.0 <= origin < capture.duration):
            return Measurement.invalid("startup_time", "s",
                                       f"recorded power-on instant {origin!r} s lies outside the capture")
        if value <= origin:
            return Measurement.invalid(
                "startup_time", "s", f"oscillation already at 90 % of its steady amplitude "
                f"{(origin - value) * 1e3:.1f} ms before the recorded power-on instant")
        value -= origin
    period = 1.0 / tone.frequency
    u = expand(0.5 * period / math.sqrt(3.0), steady.startup_u / fs, u_origin,
               clock_std(value, capture.clock_ppm))
    details = {"steady_amplitude_v": steady.level, "steady_start_s": ctx.steady_start_time,
               "envelope_span_s": ctx.envelope.span / fs if ctx.envelope else None,
               "measured_from": "capture start" if origin is None else "power-on instant",
               "power_on_at_s": origin}
    return Measurement("startup_time", value, "s", u, details=details)


def _power_on(capture: Capture) -> tuple[float | None, float]:
    """The recorded power-on instant (s from the first sample) and its standard uncertainty."""
    at = capture.metadata.get("power_on_at")
    if at is None:
        return None, 0.0
    at = float(at)
    half = float(capture.metadata.get("power_on_halfwidth") or 0.0)
    return at, (half / math.sqrt(3.0) if math.isfinite(half) and half > 0 else 0.0)
