"""THD, THD+N, SINAD, SNR, SFDR and ENOB against synthesised signals with known answers."""

from __future__ import annotations

import math

import numpy as np
import pytest
from _analysis_signals import harmonic_series, quantise, tone
from numpy.testing import assert_allclose

from benchgate.analysis import AdcInfo, Capture
from benchgate.analysis.distortion import enob, sfdr, sinad, snr, thd, thd_n

N, CYCLES = 1 << 14, 101.37  # non-coherent on purpose


def square(kmax):
    # Fourier series of a 50 % square wave: odd harmonics 1/k (handbook, docs/references.md)
    return {k: 1.0 / k for k in range(1, kmax + 1, 2)}


def triangle(kmax):
    # Fourier series of a triangle: odd harmonics ±1/k² (handbook, docs/references.md)
    return {k: (-1) ** ((k - 1) // 2) / k ** 2 for k in range(1, kmax + 1, 2)}


def sawtooth(kmax):
    return {k: (-1) ** (k + 1) / k for k in range(1, kmax + 1)}


class TestThd:
    def test_harmonic_mix(self):
        amps = {1: 1.0, 2: 0.01, 3: 0.03, 5: 0.005}
        cap = harmonic_series(N, CYCLES, amps, phases={2: 0.4, 3: 1.1, 5: 2.0})
        expected = 100 * math.sqrt(0.01 ** 2 + 0.03 ** 2 + 0.005 ** 2)  # IEEE 1241: √ΣA_h² / A₁
        m = thd(cap)
        assert_allclose(m.value, expected, rtol=1e-4)
        assert m.details["harmonics_summed"] == list(range(2, 11))

    @pytest.mark.parametrize("series, harmonics, expected", [
        (square, 10, 42.88), (square, 50, 47.30),     # docs/references.md, analytic THD table
        (triangle, 10, 12.05), (triangle, 50, 12.11),
        (sawtooth, 10, 74.15),
    ])
    def test_band_limited_waveforms(self, series, harmonics, expected):
        cap = harmonic_series(N, 61.3, series(harmonics))
        m = thd(cap, harmonics=harmonics)
        assert_allclose(m.value, expected, atol=0.006)  # table values are rounded to 0.01 %

    def test_never_past_nyquist(self):
        # fundamental at fs/7: only orders 2 and 3 lie below Nyquist (IEEE 1241: in-band only)
        cap = harmonic_series(N, N / 7 + 0.37, {1: 1.0, 2: 0.02, 3: 0.01})
        m = thd(cap)
        assert m.details["harmonics_summed"] == [2, 3]
        assert_allclose(m.value, 100 * math.hypot(0.02, 0.01), rtol=1e-3)

    def test_noise_does_not_inflate(self):
        rng = np.random.default_rng(4)
        cap, _, _ = tone(N, CYCLES, snr_db=40, rng=rng)
        m = thd(cap)
        # pure sine in noise: THD ≈ 0 within its uncertainty (common practice, no source)
        assert m.value <= m.uncertainty + 0.05

    def test_too_few_cycles(self):
        cap, _, _ = tone(200, 8.0)
        m = thd(cap)
        assert not m.valid and "harmonics not resolved" in m.reason


class TestSinadEnob:
    @pytest.mark.parametrize("bits, sinad_db", [(10, 61.96), (12, 74.00)])
    def test_ideal_quantiser(self, bits, sinad_db):
        adc = AdcInfo(bits, 1.0, bipolar=True)
        amp = 1.0 - 2 * adc.lsb  # just inside the rails
        cap, _, _ = tone(1 << 16, 1234.567, amplitude=amp, phase=0.1)
        capq = Capture(quantise(cap.samples, adc), cap.sample_rate, adc=adc)
        # IEEE Std 1241-2010: ideal N-bit quantiser SINAD = 6.02 N + 1.76 dB (full-scale sine)
        expected = sinad_db + 20 * math.log10(amp)
        assert_allclose(sinad(capq).value, expected, atol=0.1)
        # IEEE Std 1241-2010: ENOB = log2(FSR / (NAD_rms √12)) = N for an ideal quantiser
        e = enob(capq)
        assert e.details["referred_to"] == "full scale"
        assert_allclose(e.value, bits, atol=0.02)
        # without the ADC: ENOB = (SINAD − 1.76)/6.02 referred to the signal
        e2 = enob(Capture(capq.samples, capq.sample_rate))
        assert_allclose(e2.value, (sinad(capq).value - 1.76) / 6.02, atol=1e-9)

    def test_thd_n_is_inverse_sinad(self):
        rng = np.random.default_rng(9)
        x = harmonic_series(N, CYCLES, {1: 1.0, 3: 0.02}).samples + rng.normal(0, 0.003, N)
        cap = Capture(x, 1000.0)
        s = sinad(cap).value
        # docs/references.md: THD+N (linear) = 1/SINAD
        assert_allclose(thd_n(cap).value, 100 * 10 ** (-s / 20), rtol=1e-12)


class TestSnr:
    def test_white_noise(self):
        rng = np.random.default_rng(11)
        amps = {1: 1.0, 2: 0.05}
        sigma = 0.01
        x = harmonic_series(N, CYCLES, amps).samples + rng.normal(0, sigma, N)
        cap = Capture(x, 1000.0)
        # IEEE 1241: SNR excludes harmonics; A²/2 over σ²
        expected = 10 * math.log10(0.5 / sigma ** 2)
        m = snr(cap)
        assert_allclose(m.value, expected, atol=0.1)
        assert abs(m.value - expected) <= m.uncertainty
        assert sinad(cap).value < m.value - 10  # the harmonic dominates SINAD


class TestSfdr:
    def test_spur(self):
        n, fs = N, 1000.0
        t = np.arange(n) / fs
        f = CYCLES * fs / n
        x = np.sin(2 * np.pi * f * t) + 1e-3 * np.sin(2 * np.pi * 3.71 * f * t)
        # IEEE 1241: SFDR = fundamental over largest spur, dBc (here −60 dBc)
        assert_allclose(sfdr(Capture(x, fs)).value, 60.0, atol=0.05)

    def test_harmonic_is_the_spur(self):
        cap = harmonic_series(N, CYCLES, {1: 1.0, 3: 0.01, 4: 0.001})
        assert_allclose(sfdr(cap).value, 40.0, atol=0.05)


class TestUncertaintyCoverage:
    def test_snr_and_thd_cover(self):
        # JCGM 100:2008: U (k = 2) should cover ≈ 95 %; 120 seeded noisy captures
        rng = np.random.default_rng(21)
        n, snr_db, h3 = 2048, 40.0, 0.02
        sigma = math.sqrt(0.5 / 10 ** (snr_db / 10))
        snr_in, thd_in = [], []
        for _ in range(120):
            f = (51.3 + rng.uniform(-5, 5)) / n
            k = np.arange(n)
            x = np.sin(2 * np.pi * f * k + rng.uniform(0, 6.3)) + h3 * np.sin(6 * np.pi * f * k) \
                + rng.normal(0, sigma, n)
            cap = Capture(x, 1.0)
            s, t = snr(cap), thd(cap)
            snr_in.append(abs(s.value - snr_db) <= s.uncertainty)
            thd_in.append(abs(t.value - 100 * h3) <= t.uncertainty)
        assert 0.88 <= np.mean(snr_in) <= 1.0
        assert np.mean(thd_in) >= 0.9


class TestSnrBesideStrongHarmonics:
    @pytest.mark.parametrize("amps", [{1: 1.0, 2: 0.01}, {1: 1.0, 3: 0.03, 5: 0.01}])
    def test_low_noise_with_harmonics(self, amps):
        # regression: with harmonics at −30 … −40 dBc and noise at −97 dBc, the fundamental's
        # taper leakage and the fit's leftover in the fundamental band were counted as noise
        # (SNR 86.6 dB for a true 97.0 dB). IEEE Std 1241-2010 SNR definition: A₁²/2 over the
        # noise power σ² (harmonics excluded), here 10·log10(0.5/1e-10)
        rng = np.random.default_rng(4)
        n, fs = 4096, 10_000.0
        cap = harmonic_series(n, 41.49, amps, fs=fs)
        x = cap.samples + 0.5 + rng.normal(0, 1e-5, n)
        m = snr(Capture(x, fs))
        assert m.valid
        assert abs(m.value - 10 * math.log10(0.5 / 1e-10)) <= max(m.uncertainty, 0.5)


class TestNothingToSum:
    def test_no_harmonic_below_nyquist_is_invalid(self):
        # regression: a 3 kHz tone sampled at 10 kHz has its 2nd harmonic above Nyquist
        # (Nyquist–Shannon: only f < fs/2 is represented); THD came out a valid 0 %
        cap, _, _ = tone(20_000, 6000.3, fs=10_000.0)
        m = thd(cap)
        assert not m.valid and "Nyquist" in m.reason

    def test_harmonics_one_is_invalid(self):
        from benchgate.analysis import analyze

        cap, _, _ = tone(20_000, 2000.3, fs=10_000.0)
        m = analyze(cap, harmonics=1).measurements["thd"]
        assert not m.valid and m.reason
