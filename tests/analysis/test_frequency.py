"""Frequency against the Cramér–Rao bound by Monte Carlo, and its invalid cases."""

from __future__ import annotations

import math

import numpy as np
import pytest
from _analysis_signals import pink_noise, tone
from numpy.testing import assert_allclose

from benchgate.analysis import Capture, analyze
from benchgate.analysis.frequency import frequency
from benchgate.analysis.uncertainty import crlb_amplitude_std, crlb_frequency_std


def monte_carlo(n, cycles, snr_db, trials, seed, coherent=False, with_amplitude=False):
    """RMS error ÷ CRLB σ and the fraction of errors inside U (frequency, optionally amplitude)."""
    rng = np.random.default_rng(seed)
    errors, inside, a_err, a_in = [], [], [], []
    for _ in range(trials):
        c = cycles if coherent else cycles * (1 + rng.uniform(-0.02, 0.02))
        cap, f, sigma = tone(n, c, snr_db=snr_db, rng=rng, phase=rng.uniform(0, 2 * math.pi))
        result = analyze(cap, ["frequency", "amplitude"]).measurements
        m = result["frequency"]
        assert m.valid, m.reason
        errors.append(m.value - f)
        inside.append(abs(m.value - f) <= m.uncertainty)
        a = result["amplitude"]
        a_err.append(a.value - 1.0)
        a_in.append(abs(a.value - 1.0) <= a.uncertainty)
    eta = 10 ** (snr_db / 10)
    # Rife & Boorstyn (1974) / Kay (1993): var(f) ≥ 12 / ((2π)² η N (N²−1)), in Hz × fs
    crlb = crlb_frequency_std(eta, n) * 1000.0
    out = (math.sqrt(np.mean(np.square(errors))) / crlb, float(np.mean(inside)))
    if with_amplitude:
        # same sources: var(Â) ≥ 2σ²/N
        a_crlb = crlb_amplitude_std(0.5 / eta, n)
        out += (math.sqrt(np.mean(np.square(a_err))) / a_crlb, float(np.mean(a_in)))
    return out


class TestFrequency:
    @pytest.mark.parametrize("n, cycles, snr_db, coherent", [
        (64, 5.0, 20, False),
        (100, 5.0, 60, True),
        (300, 4.4, 30, False),
        (1000, 50.0, 20, True),
        (1000, 123.4, 40, False),
        (4000, 1000.3, 20, False),
    ])
    def test_reaches_crlb(self, n, cycles, snr_db, coherent):
        ratio, coverage = monte_carlo(n, cycles, snr_db, 200, seed=n + snr_db, coherent=coherent)
        # docs/references.md: a four-parameter fit reaches ≈ 1.0× the CRLB; 200 trials give the RMS
        # ratio a ±5 % (1σ) sampling spread, hence the band
        assert 0.85 < ratio < 1.15
        # JCGM 100:2008: U with k = 2 covers about 95 %
        assert 0.90 <= coverage <= 0.99

    def test_low_snr(self):
        ratio, coverage = monte_carlo(400, 20.0, 10, 200, seed=7)
        # issue benchmark: ≤ 1.5 × CRLB at 10 dB
        assert ratio < 1.5
        assert coverage >= 0.85

    @pytest.mark.parametrize("snr_db", [20, 60])
    def test_many_cycles(self, snr_db):
        # 1e5 cycles (0.2 cycles per sample); 30 trials give the RMS ratio a 1σ spread of
        # 1/√60 ≈ 13 %, so the band is ±3σ (bench/bench_estimators.py prints 100-trial figures)
        ratio, coverage, a_ratio, a_coverage = monte_carlo(500_000, 1e5, snr_db, 30, seed=5 + snr_db,
                                                           with_amplitude=True)
        assert 0.6 < ratio < 1.4 and 0.6 < a_ratio < 1.4
        assert coverage >= 0.85 and a_coverage >= 0.85

    def test_noiseless_exact(self):
        cap, f, _ = tone(5000, 321.123)
        m = frequency(cap)
        assert_allclose(m.value, f, rtol=1e-10)  # exact model, no noise (no source needed)

    def test_clock_tolerance_in_budget(self):
        # GUM: a rectangular bound a gives u = a/√3; U = 2u
        cap, f, _ = tone(5000, 321.123, clock_ppm=100)
        m = frequency(cap)
        assert_allclose(m.uncertainty, 2 * f * 100e-6 / math.sqrt(3), rtol=1e-3)

    def test_steady_part_only(self):
        # a start-up at a different frequency must not pull the result
        fs, n = 10_000.0, 20_000
        t = np.arange(n) / fs
        x = np.where(t < 0.3, 0.2 * np.sin(2 * np.pi * 700 * t), np.sin(2 * np.pi * 1000 * t))
        m = frequency(Capture(x, fs))
        assert m.valid
        assert_allclose(m.value, 1000.0, rtol=1e-6)
        assert m.details["steady_start_s"] >= 0.3

    def test_fewer_than_three_cycles(self):
        cap, _, _ = tone(200, 2.2)
        m = frequency(cap)
        assert not m.valid and "cycles" in m.reason
        assert math.isfinite(m.value)

    def test_near_nyquist(self):
        cap, _, _ = tone(1000, 470.0)
        m = frequency(cap)
        assert not m.valid and "Nyquist" in m.reason

    def test_noise_only(self):
        rng = np.random.default_rng(3)
        m = frequency(Capture(rng.normal(size=5000), 1000.0))
        assert not m.valid and "no tone" in m.reason

    @pytest.mark.parametrize("x, word", [(np.ones(100), "flat"), (np.ones(5), "too few"),
                                         (np.r_[np.zeros(50), np.nan], "NaN")])
    def test_bad_records(self, x, word):
        m = frequency(Capture(x, 1000.0))
        assert not m.valid and word in m.reason

    def test_small_tone_on_large_offset(self):
        # 1 mV on 1 kV: sums of squares must not cancel (centred fit; common practice)
        rng = np.random.default_rng(8)
        cap, f, _ = tone(5000, 61.5, amplitude=1e-3, offset=1000.0)
        noisy = Capture(cap.samples + rng.normal(0, 1e-5, cap.n), cap.sample_rate)
        m = frequency(noisy)
        assert m.valid and abs(m.value - f) <= m.uncertainty


class TestColouredNoise:
    """"No tone" is decided against the noise floor around the peak, not one white-noise level."""

    @staticmethod
    def _judge(x, fs):
        from benchgate.analysis.context import Context
        from benchgate.analysis.pulse import duty_cycle

        cap = Capture(x, fs)
        ctx = Context(cap)
        return frequency(cap, context=ctx), duty_cycle(cap, context=ctx)

    @pytest.mark.parametrize("n, fs, seed0", [(10_000, 1000.0, 0), (4096, 1000.0, 500), (16_384, 50_000.0, 900)])
    def test_pink_noise_is_no_tone(self, n, fs, seed0):
        # regression: pink noise gave a valid frequency in a quarter of captures and a valid
        # duty cycle in most. Kay (1998) periodogram detector: with the local floor and the
        # e^−25 false-alarm margin no capture of 100 may pass (the stated rate is ≤ 1 %)
        freq_valid = duty_valid = 0
        for seed in range(seed0, seed0 + 100):
            x = pink_noise(n, np.random.default_rng(seed))
            f, d = self._judge(x, fs)
            freq_valid += f.valid
            duty_valid += d.valid
        assert freq_valid <= 1 and duty_valid <= 1

    def test_brown_noise_is_no_tone(self):
        # 1/f² noise (a random walk), steeper still
        valid = sum(self._judge(pink_noise(4096, np.random.default_rng(s), exponent=2.0), 1000.0)[0].valid
                    for s in range(40))
        assert valid == 0

    @pytest.mark.parametrize("cycles", [4.3, 140.2, 1203.3])
    def test_tone_over_pink_noise_is_detected(self, cycles):
        # a tone whose peak stands 3× the detection threshold above the local pink floor at its
        # frequency (local density ∝ 1/k; derived) is still found, and measured within U; a few
        # captures lose it because pink noise makes the envelope wander and the steady part is cut
        n, fs = 10_000, 1000.0
        hits = 0
        for seed in range(20):
            rng = np.random.default_rng(seed)
            noise = pink_noise(n, rng)
            k = np.arange(1, n // 2 + 1)
            floor = (1.0 / cycles) / np.sum(1.0 / k)  # unit variance spread as 1/k over the bins
            a = math.sqrt(4.0 * 3.0 * (math.log(n) + 25.0) * floor / n * (n / 2))
            cap, f, _ = tone(n, cycles, fs=fs, amplitude=a, phase=rng.uniform(0, 6.3))
            m, _ = self._judge(cap.samples + noise, fs)
            hits += m.valid and abs(m.value - f) <= max(m.uncertainty, 1e-12)
        assert hits >= 17

    @pytest.mark.parametrize("snr_db", [-5.0, 0.0])
    def test_modest_snr_in_white_noise_still_detected(self, snr_db):
        # N·A²/(4σ²) = 4096·η/2: 396 at −5 dB, 1248 at 0 dB, far above ln N + 25 = 33.3
        rng = np.random.default_rng(4)
        found = sum(frequency(tone(4096, 301.3, snr_db=snr_db, rng=rng, phase=rng.uniform(0, 6.3))[0]).valid
                    for _ in range(30))
        assert found == 30


class TestFewCyclesOfADistortedWave:
    @pytest.mark.parametrize("n", [4000, 20_000])
    def test_never_reported_at_a_harmonic(self, n):
        # regression: a 2.4-cycle triangle (too few cycles to measure) was reported valid at
        # its 3rd harmonic, 7 cycles, by the search for the most prominent peak
        t = np.arange(n)
        s = np.sin(2 * np.pi * 2.4 * t / n + 0.3)
        x = 2 / np.pi * np.arcsin(s) + np.random.default_rng(0).normal(0, 0.01, n)
        assert not frequency(Capture(x, 1000.0)).valid

    def test_fuzz_shapes_and_few_cycles(self):
        # bounded fuzz (fixed seed): sine, square, triangle, clipped sine and sawtooth of 1–12
        # cycles in noise. Under 3 cycles nothing is valid (MIN_CYCLES); a valid frequency is
        # never a harmonic or a wrong peak (within 2 % of the truth; harmonic interference in
        # captures of few cycles is a known, smaller bias)
        rng = np.random.default_rng(42)
        for _ in range(120):
            n = int(rng.choice([256, 1000, 4000, 16_384]))
            cycles = rng.uniform(1.0, 12.0)
            t = np.arange(n)
            s = np.sin(2 * np.pi * cycles * t / n + rng.uniform(0, 6.3))
            shape = rng.choice(["sine", "square", "tri", "clip", "saw"])
            x = {"sine": s, "square": np.sign(s), "tri": 2 / np.pi * np.arcsin(s), "clip": np.clip(1.5 * s, -1, 1),
                 "saw": 2 * ((cycles * t / n + 0.1) % 1) - 1}[shape]
            m = frequency(Capture(x + rng.normal(0, 10 ** rng.uniform(-3, -1), n), 1000.0))
            if m.valid:
                assert cycles >= 2.9 and abs(m.value / (cycles * 1000.0 / n) - 1) < 0.02, (shape, n, cycles, m)
