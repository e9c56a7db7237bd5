"""Amplitude stability: the deepest dip of the oscillation envelope after start-up."""

from __future__ import annotations

import numpy as np

from benchgate.analysis.capture import Capture
from benchgate.analysis.context import Context, get_context
from benchgate.analysis.measurement import Measurement
from benchgate.analysis.uncertainty import expand

#: envelope points (one-period spans, overlapping) needed after start-up
MIN_POINTS = 16
#: the envelope counts as settled once it reaches this fraction of its typical level
SETTLED = 0.98


def amplitude_dip(capture: Capture, *, context: Context | None = None) -> Measurement:
    """Deepest dip (%) of the one-period envelope below its median, after start-up.

    An intermittent contact, a dropping-out oscillator or a squegging one shows as the envelope
    falling well below its typical level for a while; a steady oscillation keeps it within its
    noise. The value is 100·(1 − min(envelope) / median(envelope)) over the part of the capture
    from where the envelope, after start-up, first comes within 2 % of its typical level (the
    median over the last half of the capture).

    Parameters
    ----------
    capture : Capture
        An oscillation (V), from its start-up or already running.
    context : Context, optional

    Returns
    -------
    Measurement
        In %, 0 for a perfectly steady envelope, 100 for a complete dropout. Invalid when there
        is no oscillation or too little of the capture after start-up.

    Notes
    -----
    The envelope is the sliding one-period peak estimate √2·σ_local shared with the start-up
    measurement. The median is robust to short dropouts, so it stands for the normal level.
    U (k = 2) takes the envelope's own scatter (1.4826 × its median absolute deviation) as
    the standard uncertainty of its lowest point, relative to the median.

    References
    ----------
    Envelope by sliding rms and robust scale by the median absolute deviation: common practice,
    no source. JCGM 100:2008 for the expression of U.
    """
    ctx = get_context(capture, context)
    if (problem := ctx.oscillation_problem) is not None:
        return Measurement.invalid("amplitude_dip", "%", problem)
    env = ctx.envelope
    if env is None or env.level.size == 0:
        return Measurement.invalid("amplitude_dip", "%", "no envelope: capture too short")
    steady = ctx.steady
    start = steady.startup_index if steady.startup_index is not None else 0.0
    begins = env.centre - env.span / 2.0
    after = begins >= start
    tail = env.level[begins >= capture.n / 2.0]
    if tail.size == 0 or not np.any(after):
        return Measurement.invalid("amplitude_dip", "%", "too little of the capture after start-up to judge the envelope")
    # judged from where the envelope first settles within SETTLED of its typical level, so the
    # slow end of a start-up is not counted as a dip, while every later dropout is
    level, begins = env.level[after], begins[after]
    settled = np.nonzero(level >= SETTLED * float(np.median(tail)))[0]
    if settled.size == 0:
        return Measurement.invalid("amplitude_dip", "%", "the envelope never settles after start-up")
    level = level[settled[0]:]
    first = float(begins[settled[0]])
    if level.size < MIN_POINTS:
        return Measurement.invalid("amplitude_dip", "%",
                                   "too little of the capture after start-up to judge the envelope")
    typical = float(np.median(level))
    if not typical > 0:
        return Measurement.invalid("amplitude_dip", "%", "envelope is zero after start-up")
    lowest = float(level.min())
    scatter = 1.4826 * float(np.median(np.abs(level - typical)))
    value = max(0.0, 100.0 * (1.0 - lowest / typical))
    u = expand(100.0 * scatter / typical)
    details = {"typical_envelope_v": typical, "lowest_envelope_v": lowest,
               "from_s": first / capture.sample_rate, "envelope_span_s": env.span / capture.sample_rate}
    return Measurement("amplitude_dip", value, "%", u, details=details)
