"""Tapers, power spectra and peak interpolation, checked against scipy.signal as a reference."""

from __future__ import annotations

import numpy as np
import pytest
import scipy.signal
from numpy.testing import assert_allclose

from benchgate.analysis.spectrum import (
    coarse_frequency,
    enbw,
    interpolated_peak,
    power_spectrum,
    taper,
    taper_enbw,
)


class TestTaper:
    @pytest.mark.parametrize("n", [1, 2, 7, 64, 1001, 4096])
    @pytest.mark.parametrize("sym", [False, True])
    def test_matches_scipy(self, n, sym):
        # scipy.signal.windows as the reference implementation
        assert_allclose(taper("hann", n, sym=sym), scipy.signal.windows.hann(n, sym=sym), atol=1e-13)
        assert_allclose(taper("blackmanharris", n, sym=sym),
                        scipy.signal.windows.blackmanharris(n, sym=sym), atol=1e-13)
        assert_allclose(taper("rect", n, sym=sym), scipy.signal.windows.boxcar(n, sym=sym))

    @pytest.mark.parametrize("name, expected", [("rect", 1.00), ("hann", 1.50), ("blackmanharris", 2.00)])
    def test_enbw(self, name, expected):
        # Harris, Proc. IEEE 66(1), 1978, table 1 (ENBW in bins, rounded to 0.01)
        assert_allclose(enbw(taper(name, 8192)), expected, atol=0.006)
        assert_allclose(taper_enbw(name), enbw(taper(name, 8192)), rtol=1e-9)

    def test_blackman_harris_sidelobes(self):
        # Harris (1978): highest sidelobe of the 4-term Blackman–Harris taper is −92 dB
        w = taper("blackmanharris", 256)
        spec = np.abs(np.fft.rfft(w, 256 * 64))
        db = 20 * np.log10(spec / spec[0] + 1e-30)
        first_null = 4 * 64
        assert db[first_null + 10:].max() < -91.5

    def test_unknown(self):
        with pytest.raises(ValueError, match="unknown taper"):
            taper("kaiser", 16)
        with pytest.raises(ValueError, match="at least one point"):
            taper("hann", 0)


class TestPowerSpectrum:
    @pytest.mark.parametrize("n", [1000, 1024, 4097])
    @pytest.mark.parametrize("name, scipy_name", [("hann", "hann"), ("blackmanharris", "blackmanharris"),
                                                  ("rect", "boxcar")])
    def test_matches_periodogram(self, n, name, scipy_name):
        # scipy.signal.periodogram (density scaling × bin width) as the reference
        rng = np.random.default_rng(n)
        fs = 2000.0
        x = 0.3 + np.sin(2 * np.pi * 123.4 * np.arange(n) / fs) + rng.normal(0, 0.1, n)
        f_ref, p_ref = scipy.signal.periodogram(x, fs, window=scipy_name, scaling="density")
        spec = power_spectrum(x, fs, name)
        assert_allclose(spec.freqs, f_ref)
        assert_allclose(spec.power, p_ref * fs / n, rtol=1e-9, atol=1e-18)

    def test_tone_power_in_main_lobe(self):
        # Parseval: the main lobe of a sine of peak A holds A²/2 (common practice, no source)
        n, fs = 4096, 1000.0
        x = 2.0 * np.cos(2 * np.pi * 101.37 * np.arange(n) / fs)
        spec = power_spectrum(x, fs, "blackmanharris")
        k = int(round(101.37 / spec.bin_width))
        assert_allclose(spec.power[k - 5:k + 6].sum(), 2.0, rtol=1e-4)

    def test_white_noise_total(self):
        # the bins of white noise sum to its variance (Parseval, common practice)
        rng = np.random.default_rng(1)
        x = rng.normal(0, 0.5, 1 << 16)
        spec = power_spectrum(x, 1.0, "hann")
        assert_allclose(spec.power.sum(), 0.25, rtol=0.02)


class TestInterpolatedPeak:
    def test_parabola_vertex(self):
        # a Gaussian magnitude is a parabola in log: the vertex is exact (Gasior & Gonzalez 2004)
        k = np.arange(20)
        mag = np.exp(-((k - 7.3) ** 2) / 3.0)
        assert_allclose(interpolated_peak(mag, 7), 7.3, atol=1e-12)

    def test_edges(self):
        assert interpolated_peak(np.array([3.0, 1.0, 0.5]), 0) == 0.0

    @pytest.mark.parametrize("n, f", [(64, 1000.7), (1000, 123.456), (100_000, 2777.7)])
    def test_coarse_within_a_fifth_of_a_bin(self, n, f):
        fs = 10_000.0
        x = np.sin(2 * np.pi * f * np.arange(n) / fs + 0.2)
        assert abs(coarse_frequency(x, fs) - f) < 0.2 * fs / n  # common practice, no source

    def test_constant(self):
        assert coarse_frequency(np.ones(100), 1.0) == 0.0


class TestDetrend:
    @pytest.mark.parametrize("n", [5, 16, 17, 1000])
    @pytest.mark.parametrize("name", ["rect", "hann", "blackmanharris"])
    def test_mean_removed_like_periodogram(self, n, name):
        # scipy.signal.periodogram(detrend="constant") as the reference
        rng = np.random.default_rng(n)
        x = 5.0 + rng.normal(size=n)
        scipy_name = "boxcar" if name == "rect" else name
        _, p_ref = scipy.signal.periodogram(x, 1.0, window=scipy_name, scaling="density")
        assert_allclose(power_spectrum(x, 1.0, name).power, p_ref / n, rtol=1e-8, atol=1e-14)


class TestVarianceFactor:
    def test_known_windows(self):
        from benchgate.analysis.spectrum import variance_factor

        # rectangular: periodogram bins of white noise are uncorrelated (common practice)
        assert_allclose(variance_factor("rect"), 1.0)
        # Hann: w² has DFT terms 3/8, −1/4, 1/16 (×N): Σρ = 1 + 2(4/9 + 1/36) (derived)
        assert_allclose(variance_factor("hann"), 1 + 2 * (4 / 9 + 1 / 36), rtol=1e-12)
        assert 2.7 < variance_factor("blackmanharris") < 2.8
