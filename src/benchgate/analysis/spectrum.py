"""Tapers, power spectra and interpolated spectral peaks.

Pure numpy. The spectra here are scaled so that summing the bins of a tone's main lobe gives
the tone's power (A²/2 for a sine of peak amplitude A), which is what the distortion
measurements need.
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import lru_cache

import numpy as np

#: Blackman–Harris 4-term (−92 dB) coefficients, Harris (1978) table 1.
BLACKMAN_HARRIS_4 = (0.35875, 0.48829, 0.14128, 0.01168)

#: main-lobe half-width of each taper in bins (first zero of the taper transform).
MAIN_LOBE_HALF_WIDTH = {"rect": 1, "hann": 2, "blackmanharris": 4}

TAPERS = tuple(MAIN_LOBE_HALF_WIDTH)


def taper(name: str, n: int, *, sym: bool = False) -> np.ndarray:
    """A cosine-sum taper of ``n`` points.

    Parameters
    ----------
    name : {"rect", "hann", "blackmanharris"}
        Taper family; ``blackmanharris`` is the 4-term −92 dB taper.
    n : int
        Number of points (≥ 1).
    sym : bool
        True for the symmetric form (filter design); False (default) for the periodic
        ("DFT-even") form used for spectral analysis.

    Returns
    -------
    numpy.ndarray
        The taper, float64.

    Raises
    ------
    ValueError
        For an unknown taper name or ``n < 1``.

    References
    ----------
    F. J. Harris, "On the use of windows for harmonic analysis with the discrete Fourier
    transform", Proc. IEEE 66(1), 1978.
    """
    if n < 1:
        raise ValueError(f"a taper needs at least one point, got n={n}")
    _coefficients(name)
    if name == "rect":
        return np.ones(n)
    coeffs = _coefficients(name)
    if n == 1:
        return np.ones(1)
    denom = n - 1 if sym else n
    c1 = _cos_ramp(2.0 * np.pi / denom, n)
    # Horner form of Σ (−1)^k a_k cos(kx) as a polynomial in cos x (Chebyshev expansion)
    poly = np.polynomial.chebyshev.cheb2poly([(-1) ** k * a for k, a in enumerate(coeffs)])
    w = np.full(n, poly[-1])
    for coef in poly[-2::-1]:
        w *= c1
        w += coef
    return w


@lru_cache(maxsize=4)
def _periodic_taper(name: str, n: int) -> tuple[np.ndarray, float]:
    """Read-only periodic taper and its Σw², kept for the next capture of the same length
    (a station analyzes many captures of one length; the taper costs about one transform)."""
    w = taper(name, n)
    w.setflags(write=False)
    return w, float(np.einsum("i,i->", w, w))


def _coefficients(name: str) -> tuple[float, ...]:
    if name == "rect":
        return (1.0,)
    if name == "hann":
        return (0.5, 0.5)
    if name == "blackmanharris":
        return BLACKMAN_HARRIS_4
    raise ValueError(f"unknown taper {name!r}; expected one of {', '.join(TAPERS)}")


def _cos_ramp(step: float, n: int) -> np.ndarray:
    """cos(step·k), k = 0 … n−1, by a block product of two short complex exponentials."""
    block = max(1, int(np.sqrt(n)))
    nblocks = -(-n // block)
    outer = np.exp(1j * step * block * np.arange(nblocks))
    inner = np.exp(1j * step * np.arange(block))
    return np.outer(outer, inner).real.ravel()[:n]


def taper_enbw(name: str) -> float:
    """ENBW (bins) of a periodic cosine-sum taper from its coefficients: (a₀² + ½Σaₖ²)/a₀²."""
    a = _coefficients(name)
    return (a[0] ** 2 + 0.5 * sum(x * x for x in a[1:])) / a[0] ** 2


def mean_square(name: str) -> float:
    """Mean of w² over a periodic cosine-sum taper: a₀² + ½Σaₖ² (Parseval; derived)."""
    a = _coefficients(name)
    return a[0] ** 2 + 0.5 * sum(x * x for x in a[1:])


def variance_factor(name: str) -> float:
    """Σ_L ρ_L: how much the correlation between neighbouring bins of a tapered periodogram
    of white noise inflates the variance of a sum of bins (1 for the rectangular taper).

    ρ_L = |DFT(w²)[L]|² / |DFT(w²)[0]|² is the correlation of bins L apart (a cosine-sum
    taper's w² has only a few non-zero DFT terms, so 64 points give it exactly).
    """
    w = taper(name, 64)
    w2 = np.fft.fft(w * w)
    return float(np.sum(np.abs(w2) ** 2) / np.abs(w2[0]) ** 2)


def enbw(w: np.ndarray) -> float:
    """Equivalent noise bandwidth of a taper in bins: N·Σw² / (Σw)².

    References
    ----------
    Harris (1978), eq. (11).
    """
    w = np.asarray(w, dtype=float)
    return float(w.size * np.sum(w * w) / np.sum(w) ** 2)


@dataclass(frozen=True)
class Spectrum:
    """One-sided power spectrum of a real capture.

    ``power[k]`` is the power (V²) in bin k, scaled so that a white noise of variance σ²
    sums to σ² over all bins and a tone's main lobe sums to its power.
    """

    power: np.ndarray
    n: int
    sample_rate: float
    taper: str

    @property
    def freqs(self) -> np.ndarray:
        """Bin frequencies (Hz)."""
        return np.arange(self.power.size) * (self.sample_rate / self.n)

    @property
    def magnitude(self) -> np.ndarray:
        """Magnitudes proportional to |X_k| (for peak interpolation)."""
        return np.sqrt(self.power)

    @property
    def bin_width(self) -> float:
        return self.sample_rate / self.n

    @property
    def half_width(self) -> int:
        return MAIN_LOBE_HALF_WIDTH[self.taper]


def power_spectrum(x: np.ndarray, sample_rate: float, taper: str = "blackmanharris",
                   *, detrend: bool = True) -> Spectrum:
    """Tapered one-sided power spectrum.

    Parameters
    ----------
    x : numpy.ndarray
        Samples (V).
    sample_rate : float
        Sample rate (Hz).
    taper : str
        See :func:`taper`.
    detrend : bool
        Remove the mean before tapering.

    Returns
    -------
    Spectrum
        Bins 0 … N//2; ``power`` equals scipy.signal.periodogram's "density" scaling times the
        bin width.

    References
    ----------
    Harris (1978); IEEE Std 1241-2010, clause on windowed DFT testing (the standard's word).
    """
    x = np.asarray(x, dtype=float)
    n = x.size
    w, w_sq = _periodic_taper(taper, n)
    if detrend and n < 16:  # too short for the bin-wise correction below (bins would wrap)
        x = x - x.mean()
        detrend = False
    xw = x * w
    xf = np.fft.rfft(xw)
    del xw
    if detrend:
        # removing the mean before tapering = subtracting mean·DFT(w), which for a periodic
        # cosine-sum taper is non-zero only in bins 0 … 3: no second pass over the capture
        mean = float(x.mean())
        for k, a in enumerate(_coefficients(taper)):
            xf[k] -= mean * n * (a if k == 0 else (-1) ** k * a / 2.0)
    parts = xf.view(np.float64).reshape(-1, 2)  # re, im side by side: square in place, add
    np.multiply(parts, parts, out=parts)
    power = np.add(parts[:, 0], parts[:, 1])
    power *= 2.0 / (n * w_sq)
    power[0] *= 0.5
    if n % 2 == 0:
        power[-1] *= 0.5
    return Spectrum(power=power, n=n, sample_rate=float(sample_rate), taper=taper)


def interpolated_peak(mag: np.ndarray, k: int) -> float:
    """Fractional bin of a spectral peak by a parabola through the log magnitudes at k−1, k, k+1.

    Parameters
    ----------
    mag : numpy.ndarray
        Magnitude spectrum.
    k : int
        Index of a local maximum.

    Returns
    -------
    float
        The interpolated peak position in bins (k ± 0.5 at most).

    References
    ----------
    M. Gasior and J. L. Gonzalez, "Improving FFT frequency measurement resolution by
    parabolic and Gaussian spectrum interpolation", AIP Conf. Proc. 732, 2004.
    """
    if k <= 0 or k >= mag.size - 1:
        return float(k)
    tiny = np.finfo(float).tiny
    a, b, c = (np.log(max(float(v), tiny)) for v in mag[k - 1:k + 2])
    denom = a - 2.0 * b + c
    if denom >= 0:
        return float(k)
    delta = 0.5 * (a - c) / denom
    return float(k + np.clip(delta, -0.5, 0.5))


def coarse_frequency(x: np.ndarray, sample_rate: float) -> float:
    """First estimate of the strongest tone's frequency (Hz) from an interpolated tapered DFT.

    Short captures (≤ 65536 samples) use a Hann taper zero-padded eight times, long ones a
    Blackman–Harris taper without padding. Bins below one cycle per capture are skipped.
    Returns 0.0 when there is no peak (e.g. a constant capture).

    References
    ----------
    Harris (1978); Gasior and Gonzalez (2004).
    """
    x = np.asarray(x, dtype=float)
    n = x.size
    if n < 4:
        return 0.0
    x = x - x.mean()
    if n <= 65536:
        pad = 8
        mag = np.abs(np.fft.rfft(x * _periodic_taper("hann", n)[0], n * pad))
    else:
        pad = 1
        mag = np.abs(np.fft.rfft(x * _periodic_taper("blackmanharris", n)[0]))
    lo = pad  # one cycle per capture
    if mag.size <= lo + 1 or not np.any(mag[lo:] > 0):
        return 0.0
    k = lo + int(np.argmax(mag[lo:]))
    return interpolated_peak(mag, k) * sample_rate / (n * pad)


def peak_frequency(spec: Spectrum) -> float:
    """Interpolated frequency (Hz) of the largest peak above one cycle per capture, 0.0 if none."""
    p = spec.power
    if p.size < 4 or not np.any(p[1:] > 0):
        return 0.0
    k = 1 + int(np.argmax(p[1:]))
    return (k - 1 + interpolated_peak(np.sqrt(p[k - 1:k + 2]), 1)) * spec.bin_width


def band_power(spec: Spectrum, freq: float, half_width: int | None = None) -> tuple[float, slice]:
    """Power (V²) in the bins of the main lobe around ``freq`` and the bin slice used."""
    hw = spec.half_width + 1 if half_width is None else half_width
    centre = int(round(freq / spec.bin_width))
    lo = max(0, centre - hw)
    hi = min(spec.power.size, centre + hw + 1)
    return float(np.sum(spec.power[lo:hi])), slice(lo, hi)
