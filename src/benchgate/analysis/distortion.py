"""Distortion and noise of the steady part: THD, THD+N, SINAD, SNR, SFDR and ENOB.

The fundamental's power is its main-lobe power in the Blackman–Harris tapered spectrum of
the steady part; the harmonics, spurs and noise come from the same spectrum or, when the
noise lies more than 65 dB below the fundamental, from the spectrum of the
four-parameter fit residual (the fundamental removed in the time domain, so its taper
leakage does not masquerade as noise). Harmonic powers are summed over each main lobe (±5 bins); noise is
the mean power of the remaining bins, extrapolated over the whole band (DC excluded).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from benchgate.analysis import spectrum as _spectrum
from benchgate.analysis.capture import Capture
from benchgate.analysis.context import Context, get_context
from benchgate.analysis.measurement import Measurement

_TINY = 1e-300
#: above this fundamental-to-noise ratio (65 dB) the Blackman–Harris taper's far leakage
#: (about −88 dBc summed over the band) would bias the noise, so the noise and harmonics
#: are measured on the spectrum of the sine-fit residual instead (one more transform).
LEAKAGE_LIMIT = 10 ** 6.5
#: most DFT bins the fundamental may move by over the capture (drift × duration²) before its
#: power spreads past the band summed as the fundamental (main lobe ± 1 bin)
MAX_SWEEP_BINS = 1.0


@dataclass(frozen=True)
class Harmonics:
    """Tone and noise powers (V²) of the steady part, or why they cannot be trusted."""

    reason: str | None
    p1: float = math.nan
    orders: tuple[int, ...] = ()
    freqs: tuple[float, ...] = ()
    powers: tuple[float, ...] = ()  # measured band powers of the harmonics (noise included)
    harmonic_power: float = math.nan  # Σ band powers, expected noise removed
    noise: float = math.nan  # noise power over the whole band, harmonics excluded
    noise_bins: int = 0
    spur_ratio: float = math.nan  # √(largest spur band power / fundamental band power)
    band_noise: float = math.nan  # expected noise power inside one tone band
    var_factor: float = 2.76  # Σρ of the taper (spectrum.variance_factor)
    p1_raw: float = math.nan  # fundamental band power before removing the expected noise


def harmonic_analysis(ctx: Context) -> Harmonics:
    """Fundamental, harmonic and noise powers of the steady part (cached in ``ctx``)."""
    return ctx.memo("harmonics", lambda: _compute(ctx))


def _compute(ctx: Context) -> Harmonics:
    if (problem := ctx.oscillation_problem) is not None:
        return Harmonics(problem)
    tone = ctx.tone
    if ctx.validation.clipped:
        return Harmonics(ctx.validation.clipped)
    track = tone.track
    if track is not None and tone.chirp is not None:
        sweep = abs(track.drift) * (ctx.y.size / ctx.capture.sample_rate) ** 2  # bins moved
        if sweep > MAX_SWEEP_BINS:
            return Harmonics(f"the fundamental drifts by {sweep:.1f} bins over the capture: its power "
                             "is not in one spectral line")
    first = _from_spectrum(ctx, tone, ctx.spectrum, subtract_fundamental=False)
    if first.reason or first.p1 < LEAKAGE_LIMIT * first.noise:
        return first
    # noise within ~20 dB of the taper's far leakage: measure it on the fit residual instead
    # (judged on the noise alone: strong harmonics do not stop the leakage biasing the SNR)
    return _from_spectrum(ctx, tone, ctx.residual_spectrum, subtract_fundamental=True, p1_raw=first.p1_raw)


def _from_spectrum(ctx: Context, tone, spec, *, subtract_fundamental: bool,
                   p1_raw: float | None = None) -> Harmonics:
    hw = spec.half_width + 1
    df = spec.bin_width
    if tone.frequency / df < 2 * hw + 2:
        return Harmonics(f"fewer than {2 * hw + 2} cycles: harmonics not resolved")
    nb = spec.power.size
    used = np.zeros(nb, dtype=bool)
    used[: hw + 1] = True  # DC
    fund_raw, fund_slice = _spectrum.band_power(ctx.spectrum, tone.frequency, hw)
    p1_raw = fund_raw if p1_raw is None else p1_raw
    # the fundamental's band is never noise: on the residual spectrum it still holds what the
    # fit could not remove (a harmonic over a non-whole number of cycles pulls the fit a little)
    used[fund_slice] = True
    orders, freqs, powers, slices = [], [], [], []
    for k in range(2, ctx.harmonics + 1):
        fk = k * tone.frequency
        centre = int(round(fk / df))
        if centre + hw >= nb - 1:  # never sum past Nyquist
            break
        pk, slk = _spectrum.band_power(spec, fk, hw)
        orders.append(k)
        freqs.append(fk)
        powers.append(pk)
        slices.append(slk)
        used[slk] = True
    free = ~used
    n_free = int(np.count_nonzero(free))
    if n_free < 8:
        return Harmonics("too few noise bins left in the spectrum")
    density = float(np.sum(spec.power[free])) / n_free
    band_bins = 2 * hw + 1
    band_noise = density * band_bins
    noise = density * (nb - (hw + 1))  # every bin but DC, the tone bands at the mean density
    p1 = max(p1_raw - band_noise, _TINY)
    harm = float(sum(max(p - band_noise, 0.0) for p in powers))
    rest = np.where(free, spec.power, 0.0)
    k_spur = int(np.argmax(rest))
    spur = max([float(np.sum(rest[max(0, k_spur - hw):k_spur + hw + 1]))] + powers)
    return Harmonics(None, p1, tuple(orders), tuple(freqs), tuple(powers), harm, max(noise, p1 * 1e-30),
                     n_free, math.sqrt(spur / p1) if p1 > 0 else math.nan, band_noise,
                     _spectrum.variance_factor(spec.taper), p1_raw)


def _details(h: Harmonics) -> dict:
    return {"harmonics_summed": list(h.orders), "taper": "blackmanharris",
            "noise_bins": h.noise_bins}


def _harmonic_power_std(h: Harmonics) -> float:
    """Standard uncertainty (V²) of the summed harmonic power, from the noise in their bands:
    each band power P carries the band's noise Pn and a cross term of order 2√(P·Pn)."""
    return math.sqrt(sum((h.band_noise + 2.0 * math.sqrt(max(p, 0.0) * h.band_noise)) ** 2 for p in h.powers))


def _nad_rel_std(h: Harmonics) -> float:
    """Relative standard uncertainty of the noise-and-distortion power."""
    nad = h.noise + h.harmonic_power
    return math.hypot(_noise_rel_std(h) * h.noise, _harmonic_power_std(h)) / nad


def _noise_rel_std(h: Harmonics) -> float:
    """Relative standard deviation of the noise power estimate: the mean of M periodogram bins
    (each exponentially distributed) whose correlation by the taper inflates the variance by
    Σρ (:func:`benchgate.analysis.spectrum.variance_factor`)."""
    return math.sqrt(h.var_factor / max(h.noise_bins, 1))


def thd(capture: Capture, *, harmonics: int = 10, context: Context | None = None) -> Measurement:
    """Total harmonic distortion (%) referred to the fundamental: 100·√(Σ V_h²) / V₁.

    Parameters
    ----------
    capture : Capture
    harmonics : int
        Highest harmonic order summed (orders 2 … ``harmonics``); orders whose lobe would
        reach Nyquist are left out, and ``details["harmonics_summed"]`` lists those summed.
    context : Context, optional

    Notes
    -----
    Each harmonic's band power has the expected noise in its band removed (never below 0).
    U (k = 2) comes from the noise in the harmonic bands.

    References
    ----------
    IEEE Std 1241-2010, THD definition; Harris (1978) for the taper.
    """
    ctx = get_context(capture, context, harmonics=harmonics)
    h = harmonic_analysis(ctx)
    if h.reason:
        return Measurement.invalid("thd", "%", h.reason)
    if not h.orders:
        # nothing summed is no evidence of low distortion
        why = ("no harmonic order requested (harmonics < 2)" if ctx.harmonics < 2
               else "no harmonic lies below Nyquist (fundamental above a quarter of the sample rate)")
        return Measurement.invalid("thd", "%", why)
    ratio = math.sqrt(h.harmonic_power / h.p1)
    u = math.sqrt(ratio * ratio + _harmonic_power_std(h) / h.p1) - ratio
    return Measurement("thd", 100.0 * ratio, "%", 200.0 * u, details=_details(h))


def sinad(capture: Capture, *, context: Context | None = None) -> Measurement:
    """Signal to noise and distortion ratio (dB): 10·log10(P₁ / (P_noise + P_harmonics)).

    References
    ----------
    IEEE Std 1241-2010, SINAD definition (DC excluded).
    """
    ctx = get_context(capture, context)
    h = harmonic_analysis(ctx)
    if h.reason:
        return Measurement.invalid("sinad", "dB", h.reason)
    nad = h.noise + h.harmonic_power
    value = 10.0 * math.log10(h.p1 / nad)
    u = 10.0 / math.log(10.0) * _nad_rel_std(h)
    return Measurement("sinad", value, "dB", 2.0 * u, details=_details(h))


def thd_n(capture: Capture, *, context: Context | None = None) -> Measurement:
    """THD plus noise (%) over the whole band, referred to the fundamental (= 1/SINAD).

    References
    ----------
    IEEE Std 1241-2010; docs/references.md (THD+N = 1/SINAD, linear).
    """
    ctx = get_context(capture, context)
    h = harmonic_analysis(ctx)
    if h.reason:
        return Measurement.invalid("thd_n", "%", h.reason)
    nad = h.noise + h.harmonic_power
    value = 100.0 * math.sqrt(nad / h.p1)
    u = 0.5 * value * _nad_rel_std(h)
    return Measurement("thd_n", value, "%", 2.0 * u, details=_details(h))


def snr(capture: Capture, *, context: Context | None = None) -> Measurement:
    """Signal to noise ratio (dB), the summed harmonics excluded from the noise.

    References
    ----------
    IEEE Std 1241-2010, SNR definition.
    """
    ctx = get_context(capture, context)
    h = harmonic_analysis(ctx)
    if h.reason:
        return Measurement.invalid("snr", "dB", h.reason)
    value = 10.0 * math.log10(h.p1 / h.noise)
    u = 10.0 / math.log(10.0) * _noise_rel_std(h)
    return Measurement("snr", value, "dB", 2.0 * u, details=_details(h))


def sfdr(capture: Capture, *, context: Context | None = None) -> Measurement:
    """Spurious-free dynamic range (dBc): fundamental over the largest spur (harmonic or not).

    Tone powers are main-lobe band powers, so scalloping does not bias the ratio.

    No uncertainty is stated (the largest spur of a noisy spectrum is itself a maximum).

    References
    ----------
    IEEE Std 1241-2010, SFDR definition.
    """
    ctx = get_context(capture, context)
    h = harmonic_analysis(ctx)
    if h.reason:
        return Measurement.invalid("sfdr", "dB", h.reason)
    if not h.spur_ratio > 0:
        return Measurement.invalid("sfdr", "dB", "no spur above zero in the spectrum")
    return Measurement("sfdr", -20.0 * math.log10(h.spur_ratio), "dB", None, details=_details(h))


def enob(capture: Capture, *, context: Context | None = None) -> Measurement:
    """Effective number of bits.

    With the ADC known: log2(FSR / (NAD_rms·√12)), i.e. referred to full scale. Without it:
    (SINAD − 1.76)/6.02, i.e. as if the signal were full scale (``details["referred_to"]``).

    References
    ----------
    IEEE Std 1241-2010, ENOB definition; ideal quantiser SNR = 6.02·N + 1.76 dB.
    """
    ctx = get_context(capture, context)
    h = harmonic_analysis(ctx)
    if h.reason:
        return Measurement.invalid("enob", "bits", h.reason)
    nad = h.noise + h.harmonic_power
    u_db = 10.0 / math.log(10.0) * _nad_rel_std(h)
    details = _details(h)
    if capture.adc is not None:
        value = math.log2(capture.adc.full_scale / (math.sqrt(nad) * math.sqrt(12.0)))
        details["referred_to"] = "full scale"
    else:
        value = (10.0 * math.log10(h.p1 / nad) - 1.76) / 6.02
        details["referred_to"] = "signal amplitude (ADC unknown)"
    return Measurement("enob", value, "bits", 2.0 * u_db / 6.02, details=details)


def levels_dbc(h: Harmonics) -> tuple[tuple[int, float, float], ...]:
    """(order, frequency Hz, level dBc) of each harmonic considered."""
    if h.reason:
        return ()
    return tuple((k, f, 10.0 * math.log10(max(p, _TINY) / h.p1)) for k, f, p in zip(h.orders, h.freqs, h.powers, strict=True))
