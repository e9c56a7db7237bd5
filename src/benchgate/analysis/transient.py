"""Start-up: time from the start of the record until the oscillation is established."""

from __future__ import annotations

import math

from benchgate.analysis.capture import Capture
from benchgate.analysis.context import Context, get_context
from benchgate.analysis.measurement import Measurement
from benchgate.analysis.uncertainty import clock_std, expand


def startup_time(capture: Capture, *, context: Context | None = None) -> Measurement:
    """Time (s) from the first sample until the envelope first reaches 90 % of its steady amplitude.

    Parameters
    ----------
    capture : Capture
    context : Context, optional

    Returns
    -------
    Measurement
        0 when the record already starts at the steady amplitude. Invalid when there is no
        oscillation, when the amplitude is still changing at the end of the record (no steady
        part to refer to), or when the record is shorter than 8 cycles.

    Notes
    -----
    The envelope is √2 times the sliding standard deviation over one period (local mean
    removed), the steady amplitude its median over the last quarter of the record. In noise
    the envelope is first averaged over enough periods (centred) that a noise excursion
    cannot cross early; the crossing is interpolated between envelope points. U (k = 2)
    combines a rectangular half-period resolution of the one-period envelope, the remaining
    envelope noise divided by the envelope's slope at the crossing, and the clock tolerance.

    References
    ----------
    Definition as in the project's issue (90 % of steady amplitude); envelope by sliding
    rms, common practice. JCGM 100:2008 for the budget.
    """
    ctx = get_context(capture, context)
    if ctx.fatal:
        return Measurement.invalid("startup_time", "s", ctx.fatal)
    tone = ctx.tone
    if not tone.ok:
        return Measurement.invalid("startup_time", "s", tone.reason or "no oscillation")
    steady = ctx.steady
    fs = capture.sample_rate
    if capture.n * tone.frequency / fs < 8:
        return Measurement.invalid("startup_time", "s", "record shorter than 8 cycles: no start-up to see")
    if steady.growing:
        return Measurement.invalid("startup_time", "s", "amplitude still changing at the end of the record")
    if steady.startup_index is None:
        return Measurement.invalid("startup_time", "s", "envelope never reaches 90 % of its steady amplitude")
    value = 0.0 if steady.startup_index == 0.0 else steady.startup_index / fs
    period = 1.0 / tone.frequency
    u = expand(0.5 * period / math.sqrt(3.0), steady.startup_u / fs, clock_std(value, capture.clock_ppm))
    details = {"steady_amplitude_v": steady.level, "steady_start_s": ctx.steady_start_time,
               "envelope_window_s": ctx.envelope.window / fs if ctx.envelope else None}
    return Measurement("startup_time", value, "s", u, details=details)
