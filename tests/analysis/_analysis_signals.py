"""Test signals for the analysis tests (imported by the test modules next to it)."""

from __future__ import annotations

import math

import numpy as np

from benchgate.analysis import AdcInfo, Capture


def tone(n: int, cycles: float, *, fs: float = 1000.0, amplitude: float = 1.0, phase: float = 0.3,
         offset: float = 0.0, snr_db: float | None = None, rng=None, adc: AdcInfo | None = None,
         clock_ppm: float | None = None) -> tuple[Capture, float, float]:
    """A sine of ``cycles`` cycles in ``n`` samples; returns (capture, true frequency, noise σ)."""
    f = cycles * fs / n
    t = np.arange(n) / fs
    x = offset + amplitude * np.cos(2 * np.pi * f * t + phase)
    sigma = 0.0
    if snr_db is not None:
        sigma = math.sqrt(amplitude ** 2 / 2 / 10 ** (snr_db / 10))
        x = x + rng.normal(0.0, sigma, n)
    return Capture(x, fs, adc=adc, clock_ppm=clock_ppm), f, sigma


def harmonic_series(n: int, cycles: float, amps: dict[int, float], *, fs: float = 1000.0,
                    phases: dict[int, float] | None = None) -> Capture:
    """Σ A_k sin(2π k f t + φ_k): a band-limited waveform with chosen harmonic amplitudes."""
    f = cycles * fs / n
    t = np.arange(n) / fs
    x = np.zeros(n)
    for k, a in amps.items():
        x += a * np.sin(2 * np.pi * k * f * t + (phases or {}).get(k, 0.0))
    return Capture(x, fs)


def quantise(x: np.ndarray, adc: AdcInfo) -> np.ndarray:
    """Ideal mid-tread quantiser with the converter's code range."""
    codes = np.clip(np.round((x - adc.low_rail) / adc.lsb), 0, 2 ** adc.bits - 1)
    return adc.low_rail + codes * adc.lsb


def pink_noise(n: int, rng, *, exponent: float = 1.0) -> np.ndarray:
    """Gaussian noise of power density ∝ 1/f^exponent (unit variance), shaped in the frequency
    domain: complex Gaussian bins scaled by f^(−exponent/2), DC removed (common practice)."""
    bins = rng.normal(size=n // 2 + 1) + 1j * rng.normal(size=n // 2 + 1)
    k = np.arange(n // 2 + 1, dtype=float)
    k[0] = 1.0
    bins *= k ** (-0.5 * exponent)
    bins[0] = 0.0
    x = np.fft.irfft(bins, n)
    return x / np.std(x)
