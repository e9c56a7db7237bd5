"""Intermediate results shared by the measurements of one capture, computed once on demand.

``analyze`` builds one :class:`Context` per capture and hands it to every registered
measurement; a measurement called on its own builds a private one. Nothing here is global.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from functools import cached_property

import numpy as np

from benchgate.analysis import _detect, _steady, _track, sinefit, spectrum
from benchgate.analysis._detect import detection_threshold, local_floor
from benchgate.analysis._growing import GrowingFit, KeptSums
from benchgate.analysis._validate import Validation, state_levels, validate_capture
from benchgate.analysis.capture import Capture

#: fewest cycles in the analyzed part for frequency, amplitude and timing.
MIN_CYCLES = 3.0
#: tones of at least this many cycles have their noise floor read off the Blackman–Harris
#: residual spectrum (shared with the distortion figures), shorter ones off a Hann spectrum.
WIDE_LOBE_CYCLES = 64.0
#: highest fundamental, as a fraction of the sample rate.
MAX_FRACTION_OF_RATE = 0.45


FEW_CYCLES = f"fewer than {MIN_CYCLES:g} cycles in the capture"
NO_TONE = "no tone detected above the noise (no oscillation?)"
NO_OSCILLATION_FLAT = "no oscillation: the steady part is a flat line"
NO_OSCILLATION_SLOW = "no oscillation: nothing faster than one cycle per capture"
#: tone reasons meaning "nothing oscillates" (levels can then state a bound on the amplitude)
NO_OSCILLATION = (NO_TONE, NO_OSCILLATION_FLAT, NO_OSCILLATION_SLOW)


@dataclass(frozen=True)
class Tone:
    """The fitted fundamental of the steady part, or why there is none to trust."""

    fit: sinefit.SineFit | None
    frequency: float  # Hz (NaN when no fit)
    cycles: float
    reason: str | None  # None when the tone can be trusted
    noise_floor: float = math.nan  # σ² the detection was judged against (V², local or global)
    track: _track.PhaseTrack | None = None  # the phase followed over the capture (≥ 8 cycles)
    chirp: _track.ChirpFit | None = None  # fit along the tracked phase, when the drift is significant

    @property
    def amplitude(self) -> float:
        """Peak amplitude (V): along the drifting phase when there is a significant drift."""
        if self.chirp is not None:
            return self.chirp.amplitude
        return self.fit.amplitude if self.fit is not None else math.nan

    @property
    def noise_var(self) -> float:
        """Residual variance (V²) of the model used for the amplitude."""
        if self.chirp is not None:
            return self.chirp.residual_var
        return self.fit.residual_var if self.fit is not None else math.nan

    @property
    def ok(self) -> bool:
        return self.reason is None


class Context:
    """Lazily computed facts about one capture (validation, steady part, fit, spectrum)."""

    def __init__(self, capture: Capture, *, harmonics: int = 10, growing: GrowingFit | None = None):
        if int(harmonics) < 1:
            raise ValueError(f"harmonics must be at least 1, got {harmonics!r}")
        self.capture = capture
        self.harmonics = int(harmonics)
        self.growing = growing  # sums kept over the looks of a growing capture (the tone's fit)

    @cached_property
    def validation(self) -> Validation:
        return validate_capture(self.capture)

    @property
    def fatal(self) -> str | None:
        return self.validation.fatal

    @property
    def oscillation_problem(self) -> str | None:
        """Why there is no oscillation to measure: the capture's fatal fault, else the reason the
        tone cannot be trusted; None when there is one."""
        return self.fatal or self.tone.reason

    @cached_property
    def coarse(self) -> float:
        """Coarse fundamental (Hz) of the whole capture."""
        if self.fatal:
            return math.nan
        if self.capture.n > 65536:  # long capture: reuse one Blackman–Harris transform
            return spectrum.peak_frequency(self._full_spectrum)
        return spectrum.coarse_frequency(self.capture.samples, self.capture.sample_rate)

    @cached_property
    def _full_spectrum(self) -> spectrum.Spectrum:
        return spectrum.power_spectrum(self.capture.samples, self.capture.sample_rate, "blackmanharris")

    @cached_property
    def steady(self) -> _steady.Steady:
        cap = self.capture
        f0 = self.coarse
        if self.fatal or not f0 > 0:
            return _steady.Steady(0, math.nan, math.nan, None, False, None)
        env = self.envelope
        tail = cap.samples[int(cap.n * (1.0 - _steady.TAIL_FRACTION)):]
        omega = 2.0 * math.pi * f0 / cap.sample_rate
        # (the residual from the normal equations: this σ² only widens the steady band)
        noise_var = (sinefit.fit3(tail, omega, exact_rss=False).residual_var if tail.size >= 8
                     else float(np.var(tail)))
        return _steady.find_steady(env, cap.n, cap.n * f0 / cap.sample_rate, noise_var)

    @cached_property
    def envelope(self) -> _steady.Envelope | None:
        if self.fatal or not self.coarse > 0:
            return None
        return _steady.envelope(self.capture.samples, self.capture.sample_rate / self.coarse)

    @property
    def start(self) -> int:
        return self.steady.start

    @cached_property
    def y(self) -> np.ndarray:
        """Samples of the steady part."""
        return self.capture.samples[self.start:]

    @property
    def steady_start_time(self) -> float:
        return self.start / self.capture.sample_rate

    @cached_property
    def warnings(self) -> tuple[str, ...]:
        out = list(self.validation.warnings)
        if self.steady.warning:
            out.append(self.steady.warning)
        tone = self.tone
        if not self.fatal and tone.reason and tone.reason not in out:
            out.append(tone.reason)
        return tuple(out)

    @cached_property
    def tone(self) -> Tone:
        if self.fatal:
            return Tone(None, math.nan, 0.0, self.fatal)
        fs = self.capture.sample_rate
        y = self.y
        n = y.size
        if n < 16:
            return Tone(None, math.nan, 0.0, "steady part too short to fit a sine")
        adc = self.capture.adc
        flat_limit = 2.0 * adc.lsb if adc is not None else 1e-9 * max(float(np.max(np.abs(y))), 1e-300)
        if float(np.ptp(y)) <= flat_limit:
            return Tone(None, math.nan, 0.0, NO_OSCILLATION_FLAT)
        f0 = self.coarse if self.start == 0 else spectrum.coarse_frequency(y, fs)
        if not f0 > 0:
            return Tone(None, math.nan, 0.0, NO_OSCILLATION_SLOW)
        w0 = 2.0 * math.pi * f0 / fs
        if f0 * n / fs < 20 and n <= 65536:
            w0 = sinefit.best_start(y, w0)
        fit, work, track, chirp, floor, detection, spec = self._model(y, w0)
        first_cycles = fit.omega * n / (2.0 * math.pi)
        if (detection < detection_threshold(n) or first_cycles < MIN_CYCLES) and n >= 64:
            # the strongest peak is no tone above its own floor, or too slow to be measured
            # (coloured noise is strongest at low frequencies): try the peak that stands highest
            # above its local floor
            alt = _detect.most_prominent_peak(y)
            if alt is not None and abs(alt - fit.omega) * n / (2.0 * math.pi) > 2.0:
                second = self._model(y, alt)
                steady_phase = second[2] is None or second[2].followed
                harmonic = _is_harmonic(second[0].omega, fit.omega, n)
                if second[5] >= detection_threshold(n) and steady_phase and not harmonic:
                    # (a tone found only this way must keep its phase over the capture, a
                    # ring-down at power-on is no oscillation of the steady part; and it must
                    # not be a harmonic of a distorted waveform of too few cycles)
                    fit, work, track, chirp, floor, detection, spec = second
        self.__dict__["_fit_work"] = work
        if chirp is None and spec is not None:
            if spec.taper == "blackmanharris":  # the same residual: one transform, shared
                self.__dict__["residual_spectrum"] = spec
        freq = fit.omega * fs / (2.0 * math.pi)
        cycles = freq * n / fs
        reason = None
        if detection < detection_threshold(n):
            reason = NO_TONE
        elif cycles < 1.0:
            reason = NO_OSCILLATION_SLOW
        elif freq > MAX_FRACTION_OF_RATE * fs:
            reason = f"fundamental near Nyquist (above {MAX_FRACTION_OF_RATE:g} of the sample rate)"
        elif cycles < MIN_CYCLES:
            reason = f"{FEW_CYCLES} ({cycles:.2f})"
        elif not fit.converged:
            reason = "the four-parameter sine fit did not converge"
        return Tone(fit, freq, cycles, reason, floor, track, chirp)

    def _model(self, y: np.ndarray, w0: float) -> tuple:
        """Four-parameter fit from ``w0``, its phase track and drifting-phase fit, the noise floor
        at its frequency and the detection statistic N·A²/(4·floor)."""
        n = y.size
        fs = self.capture.sample_rate
        work: sinefit.Workspace | KeptSums = sinefit.Workspace(n)
        if self.growing is not None and y.size == self.capture.n - self.start:
            # the same fit from sums kept over earlier looks (benchgate.analysis._growing); its
            # per-block sums at the last frequency serve the phase track as fit4's would
            fit = self.growing.fit4(self.capture.samples, self.start, w0)
            work = KeptSums(self.growing, n)
        else:
            fit = sinefit.fit4(y, w0, work=work)
        cycles = fit.omega * n / (2.0 * math.pi)
        track = _track.track_phase(y, fit, cycles, fs, work) if fit.converged and cycles < n / 2 else None
        chirp = None
        if track is not None and track.followed and track.significant:
            chirp = _track.chirp_fit(y, fit, track, fs)
        amp = chirp.amplitude if chirp is not None else fit.amplitude
        floor, spec = self._detection_floor(fit, cycles, chirp)
        detection = n * amp ** 2 / (4.0 * floor) if floor > 0 else math.inf
        return fit, work, track, chirp, floor, detection, spec

    def _detection_floor(self, fit: sinefit.SineFit, cycles: float,
                         chirp: _track.ChirpFit | None) -> tuple[float, spectrum.Spectrum | None]:
        """The larger of the residual variance and the residual's local floor at the fitted
        frequency (:func:`benchgate.analysis._detect.local_floor`): coloured noise is judged
        against its own level there. The residual is that of the drifting-phase fit when
        there is one (a drifting tone's own power would otherwise raise its floor)."""
        floor = chirp.residual_var if chirp is not None else fit.residual_var
        spec = None
        taper = "blackmanharris" if cycles >= WIDE_LOBE_CYCLES else "hann"
        amp = chirp.amplitude if chirp is not None else fit.amplitude
        if floor > 0 and fit.n * amp ** 2 / (4.0 * floor) >= _detect.beyond_any_local_floor(fit.n, cycles, taper):
            return floor, None  # no local floor could undo this detection: skip the transform
        if fit.n >= 64 and cycles >= 1.0:
            resid = chirp.residual if chirp is not None else sinefit.residual(self.y, fit)
            # a tone of many cycles: the Blackman–Harris spectrum the distortion figures use
            # too (its wider main lobe costs nothing there); of few: Hann, whose narrower lobe
            # leaves more neighbouring bins below the tone
            spec = spectrum.power_spectrum(resid, self.capture.sample_rate, taper)
            local = local_floor(spec, cycles)
            if local is not None:
                floor = max(floor, local)
        return floor, spec

    @cached_property
    def spectrum(self) -> spectrum.Spectrum:
        """Blackman–Harris spectrum of the steady part."""
        if self.start == 0 and self.capture.n > 65536:
            return self._full_spectrum
        return spectrum.power_spectrum(self.y, self.capture.sample_rate, "blackmanharris")

    @cached_property
    def residual_spectrum(self) -> spectrum.Spectrum | None:
        """Blackman–Harris spectrum of the steady part with the fitted fundamental removed.

        Removing the fundamental in the time domain keeps its taper leakage out of the
        noise and harmonic bins, so SINAD can be measured down to double-precision limits.
        """
        fit = self.tone.fit
        if fit is None:
            return None
        return spectrum.power_spectrum(sinefit.residual(self.y, fit), self.capture.sample_rate,
                                       "blackmanharris")

    @cached_property
    def steady_levels(self) -> tuple[float, float]:
        """IEEE 181 state levels (low, high) of the steady part."""
        if self.start == 0:
            return self.validation.low_state, self.validation.high_state
        return state_levels(self.y)

    @property
    def phase_track(self) -> _track.PhaseTrack | None:
        """The phase of the fundamental followed over the steady part (None under 8 cycles)."""
        return self.tone.track

    def fit_workspace(self) -> sinefit.Workspace | KeptSums | None:
        """cos/sin of the steady part at the fitted frequency (left by the fit), if any."""
        _ = self.tone
        return self.__dict__.get("_fit_work")

    def memo(self, key: str, compute):
        """Compute a shared intermediate result once (measurement modules keep theirs here)."""
        cache = self.__dict__.setdefault("_memo", {})
        if key not in cache:
            cache[key] = compute()
        return cache[key]

    def cycle_bounds(self) -> np.ndarray | None:
        """Sample indices (into ``y``) of whole-cycle boundaries of the steady part, or None."""
        tone = self.tone
        if not tone.ok:
            return None
        period = self.capture.sample_rate / tone.frequency
        k = int(math.floor(self.y.size / period))
        if k < 1:
            return None
        return np.round(np.arange(k + 1) * period).astype(np.int64).clip(0, self.y.size)


def _is_harmonic(omega: float, fundamental: float, n: int) -> bool:
    """``omega`` lies within one bin of the 2nd to 10th multiple of ``fundamental`` (a fit to a
    harmonic of a waveform of few cycles is pulled off the exact multiple by the fundamental)."""
    if not fundamental > 0:
        return False
    h = round(omega / fundamental)
    return 2 <= h <= 10 and abs(omega - h * fundamental) * n / (2.0 * math.pi) <= 1.0


def get_context(capture: Capture, context: Context | None, *, harmonics: int = 10) -> Context:
    """The shared context when one is given (it must belong to ``capture``), else a new one."""
    if context is None:
        return Context(capture, harmonics=harmonics)
    if context.capture is not capture:
        raise ValueError("the analysis context belongs to a different capture")
    return context
