"""Terms of the level measurements' budgets that need more than one line: the bound stated
for a capture with no oscillation, the settling of a still-moving amplitude, and the amplitude
lost to a phase the fit does not follow."""

from __future__ import annotations

import math

import numpy as np

from benchgate.analysis import _track, sinefit
from benchgate.analysis._steady import TAIL_FRACTION
from benchgate.analysis.capture import Capture
from benchgate.analysis.context import (
    NO_OSCILLATION,
    NO_OSCILLATION_SLOW,
    NO_TONE,
    Context,
    detection_threshold,
)
from benchgate.analysis.measurement import Measurement
from benchgate.analysis.uncertainty import expand, quantisation_std


def no_oscillation_amplitude(ctx: Context, capture: Capture) -> Measurement | None:
    """A valid upper bound for the amplitude of a capture with no oscillation, or None.

    A flat line, or a steady part that is flat or only drifts (nothing faster than one cycle
    per capture, e.g. an oscillation that died out), bounds the amplitude by half the span.
    A capture whose fit stayed below the detection threshold (noise only) bounds it by the larger of
    twice the amplitude that threshold would have detected, √(4σ²T/N) with T the threshold and σ²
    the noise floor at the fitted frequency, and √2 times the AC rms of the steady part (no
    sine can carry more than the capture's power, whether or not it was detected). A dead unit
    then fails an amplitude window instead of being left undecided.
    """
    q = quantisation_std(capture.adc)
    if ctx.validation.flat:
        half = 0.5 * float(np.ptp(capture.samples))
        return Measurement("amplitude", half, "V", half + expand(q),
                           details={"method": "bound: flat line", "no_oscillation": True})
    tone = ctx.tone
    if tone.reason not in NO_OSCILLATION:
        return None
    fit = tone.fit
    if tone.reason == NO_OSCILLATION_SLOW:
        # less than a cycle of a large slow sine looks just like a drift: its amplitude is not
        # bounded by anything in the capture
        return Measurement.invalid("amplitude", "V", f"{NO_OSCILLATION_SLOW}: part of one slow cycle "
                                   "cannot be told from a drift, so no amplitude bound can be stated")
    if tone.reason != NO_TONE or fit is None:
        half = 0.5 * float(np.ptp(ctx.y))
        return Measurement("amplitude", 0.0, "V", half + expand(q),
                           details={"method": "bound: half the span of the steady part",
                                    "no_oscillation": True})
    detectable = math.sqrt(4.0 * tone.noise_floor * detection_threshold(fit.n) / fit.n)
    # a sine of amplitude A carries A²/2 of the capture's AC power, so √2·(AC rms) bounds any
    # sine that is there but was not detected as one (e.g. a chirp too fast to follow); the
    # detection limit alone bounds only a steady sine
    span_bound = math.sqrt(2.0) * float(np.std(ctx.y))
    u = max(fit.amplitude, 2.0 * detectable, span_bound) + expand(q)
    return Measurement("amplitude", fit.amplitude, "V", u,
                       details={"method": "bound: no tone above the noise", "no_oscillation": True,
                                "detectable_v": detectable})


class Wander:
    """How far the fundamental's phase strays from the fitted model (see :func:`_wander`)."""

    def __init__(self, relative: float = 0.0, reason: str | None = None):
        self.relative = relative
        self.reason = reason


#: largest relative amplitude loss from an unfollowed phase wander that is stated as a U term
MAX_WANDER = 0.05


def wander(ctx: Context) -> Wander:
    """Amplitude lost to a phase the model does not follow, as a relative standard uncertainty.

    A sine fit along a phase that is off by ε(t) finds A·mean(cos ε) ≈ A(1 − ε²/2): the phase
    residual about the fitted quadratic beyond its noise (rms ε, from the segment phases of
    :mod:`benchgate.analysis._track`) gives the term ε²/2 (derived, second-order Taylor).
    Only a residual clearly above the noise (more than twice its expected rms) counts. A
    phase that cannot be followed from segment to segment, or a loss above 5 %, leaves no
    trustworthy amplitude at all.
    """
    track = ctx.tone.track
    if track is None:
        return Wander()
    if not track.followed:
        if track.residual > 2.0 * track.noise or track.step > 0.25 * math.pi:
            return Wander(reason="frequency changes too fast to follow over the capture: the fitted "
                           "amplitude would be too small")
        return Wander()
    if track.residual <= 2.0 * track.noise:
        return Wander()
    loss = 0.5 * track.misfit ** 2
    if loss > MAX_WANDER:
        return Wander(reason=f"the phase wanders {track.misfit:.2f} rad rms beyond a steady drift: "
                       "no single amplitude fits the capture")
    return Wander(loss)


def settling(ctx: Context) -> float:
    """Relative amount by which the steady part's amplitude still differs from its final one.

    The steady part may begin while the amplitude is still within the steady band (1 % of the
    level) but not yet settled, e.g. the slow tail of an exponential approach; the fit then
    averages over that tail. The fitted amplitude is compared with a three-parameter fit (same
    frequency) to the last quarter of the capture; when they differ by more than three standard
    deviations of the difference (nested least-squares estimates: var = 2σ²(1/K − 1/N), K and
    N the samples of the quarter and of the steady part; Rife and Boorstyn 1974 for 2σ²/N),
    the difference is returned as a standard uncertainty term (relative); else 0.
    (Derived; a settling systematic effect, JCGM 100:2008 F.2.)
    """
    return ctx.memo("settling", lambda: _settling_compute(ctx))


def _settling_compute(ctx: Context) -> float:
    fit = ctx.tone.fit
    if fit is None or not fit.amplitude > 0:
        return 0.0
    y = ctx.y
    k = min(int(TAIL_FRACTION * ctx.capture.n), y.size)
    if k < 16 or k > 0.8 * y.size:
        return 0.0
    tone = ctx.tone
    if tone.chirp is not None:  # the tail along the same drifting phase
        tail_amp = _track.chirp_fit(y, fit, tone.track, ctx.capture.sample_rate, start=y.size - k).amplitude
    else:
        tail_amp = sinefit.fit3(y[-k:], fit.omega, exact_rss=False).amplitude  # (its residual is not used)
    diff = tone.amplitude - tail_amp
    sd = math.sqrt(max(2.0 * tone.noise_var * (1.0 / k - 1.0 / y.size), 0.0))
    if abs(diff) <= 3.0 * sd:
        return 0.0
    return abs(diff) / tone.amplitude
