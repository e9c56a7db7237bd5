"""Response to a known stimulus: gain, phase and distortion of a two-channel record.

A :class:`Stimulated` record holds the unit's input (the reference channel) and its output,
sampled at the same instants, while a generator drives one sine at a known frequency. Both
channels are fitted at that frequency (IEEE Std 1057 three-parameter fit), so gain and phase
are measured against the stimulus actually present at the input, not the generator's setting.

The fitted frequency is the reference channel's own (a four-parameter fit started at the
stated stimulus frequency), so a generator whose clock is a little off does not bias the
three-parameter fits; a reference tone far from the stated frequency makes everything invalid.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from functools import cached_property
from typing import Any

import numpy as np

from benchgate.analysis import sinefit
from benchgate.analysis._detect import detection_threshold
from benchgate.analysis._validate import validate_capture
from benchgate.analysis.capture import Capture
from benchgate.analysis.measurement import Measurement
from benchgate.analysis.uncertainty import crlb_amplitude_std, expand, quantisation_std

#: fewest stimulus cycles in the record.
MIN_CYCLES = 3.0
#: highest stimulus frequency, as a fraction of the sample rate.
MAX_FRACTION_OF_RATE = 0.45
#: largest relative distance of the reference tone from the stated stimulus frequency.
MAX_FREQUENCY_ERROR = 0.01
#: harmonic orders fitted for the output THD (never past Nyquist).
THD_HARMONICS = 10
_DEG = 180.0 / math.pi


@dataclass(frozen=True, eq=False)
class Stimulated:
    """A two-channel record of one sine stimulus.

    Parameters
    ----------
    reference : Capture
        The unit's input (what the generator actually delivered), in volts.
    output : Capture
        The unit's output, sampled at the same instants as ``reference``.
    frequency : float
        The stated stimulus frequency in Hz.
    """

    reference: Capture
    output: Capture
    frequency: float

    def __post_init__(self) -> None:
        f = float(self.frequency)
        if not math.isfinite(f) or f <= 0:
            raise ValueError(f"stimulus frequency must be a positive number of Hz, got {self.frequency!r}")
        object.__setattr__(self, "frequency", f)


@dataclass(frozen=True)
class ToneFit:
    """Both channels fitted at the reference tone's frequency (phasors A − iB, volts peak)."""

    reason: str | None  # None when gain and phase can be trusted
    frequency: float = math.nan  # Hz, the reference's fitted frequency
    ref: complex = 0j
    out: complex = 0j
    ref_noise: float = math.nan  # residual variance V²
    out_noise: float = math.nan
    n: int = 0
    out_detected: bool = False

    @property
    def transfer(self) -> complex:
        return self.out / self.ref


class ResponseContext:
    """Per-record work shared by the response measurements (fits computed once)."""

    def __init__(self, record: Stimulated, *, harmonics: int = THD_HARMONICS):
        self.record = record
        self.harmonics = int(harmonics)

    @cached_property
    def fit(self) -> ToneFit:
        return _fit(self.record)

    @cached_property
    def ref_checked(self):
        return validate_capture(self.record.reference)

    @cached_property
    def out_checked(self):
        return validate_capture(self.record.output)


def get_response_context(record: Stimulated, context: ResponseContext | None) -> ResponseContext:
    if context is None:
        return ResponseContext(record)
    if context.record is not record:
        raise ValueError("the response context belongs to a different record")
    return context


def _pair_problem(record: Stimulated) -> str | None:
    ref, out = record.reference, record.output
    if ref.sample_rate != out.sample_rate:
        return (f"the channels were sampled at different rates ({ref.sample_rate:g} Hz and "
                f"{out.sample_rate:g} Hz)")
    if ref.n != out.n or ref.start_time != out.start_time:
        return "the channels do not cover the same sample instants"
    for name, cap in (("reference", ref), ("output", out)):
        checked = validate_capture(cap)
        if checked.fatal and not checked.flat:
            return f"{name} channel: {checked.fatal}"
    return None


def _fit(record: Stimulated) -> ToneFit:
    problem = _pair_problem(record)
    if problem:
        return ToneFit(problem)
    ref, out = record.reference, record.output
    fs, n, f = ref.sample_rate, ref.n, record.frequency
    if f > MAX_FRACTION_OF_RATE * fs:
        return ToneFit(f"stimulus frequency {f:g} Hz is above {MAX_FRACTION_OF_RATE:g} of the sample rate")
    cycles = f * n / fs
    if cycles < MIN_CYCLES:
        return ToneFit(f"fewer than {MIN_CYCLES:g} stimulus cycles in the record ({cycles:.2f})")
    ref_checked = validate_capture(ref)
    if ref_checked.flat:
        return ToneFit("no stimulus on the reference channel (flat line)")
    if ref_checked.clipped:
        return ToneFit(f"reference channel: {ref_checked.clipped}")
    omega0 = 2.0 * math.pi * f / fs
    if cycles < 20:
        omega0 = sinefit.best_start(ref.samples, omega0)
    rfit4 = sinefit.fit4(ref.samples, omega0)
    f_ref = rfit4.omega * fs / (2.0 * math.pi)
    if not rfit4.converged or abs(f_ref - f) > MAX_FREQUENCY_ERROR * f:
        return ToneFit(f"the reference channel's tone ({f_ref:g} Hz) is not at the stimulus frequency "
                       f"{f:g} Hz")
    rfit = sinefit.fit3(ref.samples, rfit4.omega)
    ofit = sinefit.fit3(out.samples, rfit4.omega)
    threshold = detection_threshold(n)
    if not _detected(rfit, threshold):
        return ToneFit("no stimulus above the noise on the reference channel")
    return ToneFit(None, f_ref, complex(rfit.a, -rfit.b), complex(ofit.a, -ofit.b), rfit.residual_var,
                   ofit.residual_var, n, _detected(ofit, threshold))


def _detected(fit: sinefit.SineFit, threshold: float) -> bool:
    if fit.residual_var <= 0:
        return fit.amplitude > 0
    return fit.n * fit.amplitude ** 2 / (4.0 * fit.residual_var) >= threshold


def _amplitude_u(amplitude_noise: float, n: int, capture: Capture) -> float:
    """Standard uncertainty (V) of a fitted amplitude: Cramér–Rao term and ADC resolution."""
    return math.hypot(crlb_amplitude_std(amplitude_noise, n), quantisation_std(capture.adc))


def _channel_gain_u(record: Stimulated) -> float:
    """Relative standard uncertainty of the channel-to-channel gain match, from the capture's
    metadata (``channel_gain_tolerance``: a rectangular bound, relative), 0 when not stated."""
    tol = record.output.metadata.get("channel_gain_tolerance") or 0.0
    return float(tol) / math.sqrt(3.0)


def _refused(ctx: ResponseContext, name: str, unit: str) -> Measurement | None:
    fit = ctx.fit
    if fit.reason:
        return Measurement.invalid(name, unit, fit.reason)
    if ctx.out_checked.clipped and ctx.record.output.adc is not None and "rail" in ctx.out_checked.clipped:
        return Measurement.invalid(name, unit, f"output channel: {ctx.out_checked.clipped}")
    return None


def _gain_terms(ctx: ResponseContext) -> tuple[float, float, dict[str, Any]]:
    """Gain (V/V), its standard uncertainty and details."""
    fit = ctx.fit
    rec = ctx.record
    a_in, a_out = abs(fit.ref), abs(fit.out)
    g = a_out / a_in
    u_in = _amplitude_u(fit.ref_noise, fit.n, rec.reference) / a_in  # relative
    u_out = _amplitude_u(fit.out_noise, fit.n, rec.output) / a_in  # absolute, in V/V
    u = math.sqrt(u_out ** 2 + (g * u_in) ** 2 + (g * _channel_gain_u(rec)) ** 2)
    details: dict[str, Any] = {
        "method": "IEEE 1057 three-parameter fits of both channels at the reference tone's frequency",
        "frequency_hz": fit.frequency, "input_amplitude_v": a_in, "output_amplitude_v": a_out,
        "samples_used": fit.n,
    }
    if not fit.out_detected:
        details["no_response"] = True
    return g, u, details


def gain(record: Stimulated, *, context: ResponseContext | None = None) -> Measurement:
    """Voltage gain |V_out/V_in| (V/V) at the stimulus frequency.

    Parameters
    ----------
    record : Stimulated
    context : ResponseContext, optional

    Returns
    -------
    Measurement
        The ratio of the fitted output and reference amplitudes. U (k = 2) combines the
        Cramér–Rao amplitude terms √(2σ²/N) of both channels, their ADC resolution and the
        channel-to-channel gain tolerance when the capture states one. With no output tone
        above the noise the value is still valid (a dead output is a small gain, and fails a
        gain window), and ``details["no_response"]`` is set. Invalid when the reference has no
        stimulus, is clipped, or its tone is not at the stated frequency; when the channels do
        not share sample instants; when an ADC rail clips the output.

    References
    ----------
    IEEE Std 1057-2017, three-parameter sine fit; Rife and Boorstyn (1974), Cramér–Rao bound
    of the amplitude; JCGM 100:2008, 5.1 (propagation of uncertainty).
    """
    ctx = get_response_context(record, context)
    refused = _refused(ctx, "gain", "V/V")
    if refused:
        return refused
    g, u, details = _gain_terms(ctx)
    return Measurement("gain", g, "V/V", expand(u), details=details)


def gain_db(record: Stimulated, *, context: ResponseContext | None = None) -> Measurement:
    """Voltage gain in decibels, 20·log10|V_out/V_in|.

    Returns
    -------
    Measurement
        U = (20/ln 10)·U_G/G (first-order propagation). When U_G is not small against G
        (no output tone), the value stated is the upper bound 20·log10(G + U_G) with no
        uncertainty and ``details["upper_bound"]`` set: it fails a lower limit, never passes
        one by luck.

    References
    ----------
    IEEE Std 1057-2017; JCGM 100:2008, 5.1.2.
    """
    ctx = get_response_context(record, context)
    refused = _refused(ctx, "gain_db", "dB")
    if refused:
        return refused
    g, u, details = _gain_terms(ctx)
    big_u = expand(u)
    if not fit_ok_for_db(g, big_u):
        details["upper_bound"] = True
        return Measurement("gain_db", 20.0 * math.log10(max(g + big_u, 1e-300)), "dB", None, details=details)
    return Measurement("gain_db", 20.0 * math.log10(g), "dB", 20.0 / math.log(10.0) * big_u / g,
                       details=details)


def fit_ok_for_db(g: float, big_u: float) -> bool:
    """A gain can be stated in dB with a symmetric U when U is below a third of the gain."""
    return g > 0 and big_u < g / 3.0


def phase(record: Stimulated, *, context: ResponseContext | None = None) -> Measurement:
    """Phase of the output relative to the input (degrees, −180 … +180) at the stimulus frequency.

    Returns
    -------
    Measurement
        arg(V_out/V_in) from the two fitted phasors. U combines the Cramér–Rao phase terms
        of both channels, var(φ) = 2σ²/(N·A²) for a fit at a known frequency with the time
        origin at the record's centre, and the channel-to-channel sampling skew when the
        capture states one (``channel_skew_s``, a rectangular bound). Invalid with no output
        tone above the noise (there is no phase to state).

    References
    ----------
    IEEE Std 1057-2017; Rife and Boorstyn (1974); Kay (1993), Cramér–Rao bound of the phase.
    """
    ctx = get_response_context(record, context)
    refused = _refused(ctx, "phase", "deg")
    if refused:
        return refused
    fit = ctx.fit
    if not fit.out_detected:
        return Measurement.invalid("phase", "deg", "no output tone above the noise at the stimulus frequency")
    value = math.degrees(math.atan2(fit.transfer.imag, fit.transfer.real))
    var = 2.0 * fit.ref_noise / (fit.n * abs(fit.ref) ** 2) + 2.0 * fit.out_noise / (fit.n * abs(fit.out) ** 2)
    skew = float(record.output.metadata.get("channel_skew_s") or 0.0)
    u_skew = 360.0 * fit.frequency * skew / math.sqrt(3.0)
    details = {"method": "IEEE 1057 three-parameter fits of both channels", "frequency_hz": fit.frequency,
               "convention": "output relative to input; negative lags"}
    return Measurement("phase", value, "deg", expand(_DEG * math.sqrt(var), u_skew), details=details)


def input_amplitude(record: Stimulated, *, context: ResponseContext | None = None) -> Measurement:
    """Peak amplitude (V) of the stimulus at the unit's input (the reference channel's fit)."""
    ctx = get_response_context(record, context)
    fit = ctx.fit
    if fit.reason:
        return Measurement.invalid("input_amplitude", "V", fit.reason)
    u = _amplitude_u(fit.ref_noise, fit.n, record.reference)
    return Measurement("input_amplitude", abs(fit.ref), "V", expand(u),
                       details={"method": "IEEE 1057 three-parameter fit at the reference frequency"})


def output_amplitude(record: Stimulated, *, context: ResponseContext | None = None) -> Measurement:
    """Peak amplitude (V) of the output at the stimulus frequency (three-parameter fit)."""
    ctx = get_response_context(record, context)
    refused = _refused(ctx, "output_amplitude", "V")
    if refused:
        return refused
    fit = ctx.fit
    u = _amplitude_u(fit.out_noise, fit.n, record.output)
    return Measurement("output_amplitude", abs(fit.out), "V", expand(u),
                       details={"method": "IEEE 1057 three-parameter fit at the reference frequency"})


def output_thd(record: Stimulated, *, context: ResponseContext | None = None) -> Measurement:
    """THD of the output (%), from a least-squares fit of the stimulus frequency's harmonics.

    The output is fitted with cos(kωt), sin(kωt) for k = 1 … H (H = 10, never past
    Nyquist) and a constant at the reference's frequency. THD = √(Σ_{k≥2} A_k²)/A_1, each
    A_k² corrected for its noise bias 2σ²/N. Unlike :func:`benchgate.analysis.distortion.thd`
    it does not refuse flat tops: the unit's own clipping is what a level sweep measures.
    An ADC rail clipping the output still makes it invalid.

    Returns
    -------
    Measurement
        U from first-order propagation of the amplitude variances (σ² from the residual)
        while the harmonic power S stands clear of its spread u_S (S > 4·u_S); otherwise the
        harmonics are not told from the noise and U spans zero and the bound √(S + 2·u_S)/A_1.

    References
    ----------
    IEEE Std 1057-2017 (sine fit at a known frequency, extended to its harmonics); IEEE Std
    1241-2010 (THD referred to the fundamental); JCGM 100:2008, 5.1.2.
    """
    ctx = get_response_context(record, context)
    refused = _refused(ctx, "output_thd", "%")
    if refused:
        return refused
    fit = ctx.fit
    if not fit.out_detected:
        return Measurement.invalid("output_thd", "%", "no output tone above the noise at the stimulus frequency")
    out = record.output
    omega = 2.0 * math.pi * fit.frequency / out.sample_rate
    orders = [k for k in range(1, ctx.harmonics + 1) if k * omega < math.pi * 0.98]
    if len(orders) < 2:
        return Measurement.invalid("output_thd", "%", "no harmonic below Nyquist at this stimulus frequency")
    amps, noise = harmonic_fit(out.samples, omega, orders)
    n = out.n
    var_a = 2.0 * noise / n  # variance of one fitted amplitude (Cramér–Rao)
    a1 = amps[0]
    # unbiased sum of the harmonic powers (each Â_k² carries + var_a of noise)
    s = max(float(np.sum(amps[1:] ** 2 - var_a)), 0.0)
    value = math.sqrt(s) / a1
    # var(Â_k²) ≈ 4·A_k²·var_a + 2·var_a² (Gaussian noise), summed over the harmonics
    powers = np.maximum(amps[1:] ** 2 - var_a, 0.0)
    u_s = math.sqrt(float(np.sum(4.0 * powers * var_a + 2.0 * var_a ** 2)))
    # first order where the harmonics stand clear of the noise; near zero the distance to the
    # bound √(S + 2·u_S) (the square root is not smooth there)
    if s > 4.0 * u_s:
        u = math.hypot(u_s / (2.0 * math.sqrt(s)), value * math.sqrt(var_a)) / a1
    else:  # no harmonic stands clear of the noise: U reaches from zero to the bound
        bound = math.sqrt(s + 2.0 * u_s) / a1
        u = max(value, bound - value) / 2.0
    details = {"method": "least-squares fit of the stimulus frequency's harmonics",
               "harmonics": orders[-1], "fundamental_v": a1}
    return Measurement("output_thd", 100.0 * value, "%", 100.0 * expand(u), details=details)


def harmonic_fit(y: np.ndarray, omega: float, orders: list[int]) -> tuple[np.ndarray, float]:
    """Peak amplitudes of the harmonics ``orders`` of ω (rad/sample) and the residual variance."""
    y = np.asarray(y, dtype=float)
    n = y.size
    t = np.arange(n) - (n - 1) / 2.0
    cols = [np.ones(n)]
    for k in orders:
        cols.append(np.cos(k * omega * t))
        cols.append(np.sin(k * omega * t))
    m = np.column_stack(cols)
    # normal equations without BLAS threads (the columns are nearly orthogonal on a centred
    # time axis, so this is well conditioned; predictable on a busy machine)
    g = np.einsum("ij,ik->jk", m, m)
    p = np.linalg.solve(g, np.einsum("ij,i->j", m, y))
    resid = y - np.einsum("ij,j->i", m, p)
    noise = float(resid @ resid) / max(n - m.shape[1], 1)
    amps = np.hypot(p[1::2], p[2::2])
    return amps, noise
