"""Amplitude (against the Cramér–Rao bound), peak-to-peak, AC rms and DC offset."""

from __future__ import annotations

import math

import numpy as np
import pytest
from _analysis_signals import quantise, tone
from numpy.testing import assert_allclose

from benchgate.analysis import AdcInfo, Capture
from benchgate.analysis.levels import amplitude, dc_offset, rms, vpp


class TestAmplitude:
    @pytest.mark.parametrize("n, cycles, snr_db", [(64, 5.0, 20), (500, 37.3, 10), (2000, 200.7, 40)])
    def test_reaches_crlb_and_covers(self, n, cycles, snr_db):
        rng = np.random.default_rng(n)
        err, inside = [], []
        for _ in range(200):
            cap, _, sigma = tone(n, cycles * (1 + rng.uniform(-0.02, 0.02)), snr_db=snr_db, rng=rng,
                                 phase=rng.uniform(0, 6.3))
            m = amplitude(cap)
            err.append(m.value - 1.0)
            inside.append(abs(m.value - 1.0) <= m.uncertainty)
        # Rife & Boorstyn (1974): var(Â) ≥ 2σ²/N
        ratio = math.sqrt(np.mean(np.square(err))) / math.sqrt(2 * sigma ** 2 / n)
        assert 0.85 < ratio < 1.2
        # JCGM 100:2008, k = 2 ≈ 95 %
        assert 0.90 <= np.mean(inside) <= 0.99

    def test_resolution_in_budget(self):
        # GUM F.2.2.1: resolution Q gives u = Q/√12
        adc = AdcInfo(8, 2.0)
        cap, _, _ = tone(4000, 100.3, amplitude=0.7, offset=1.0)
        capq = Capture(quantise(cap.samples, adc), cap.sample_rate, adc=adc)
        m = amplitude(capq)
        assert m.uncertainty >= 2 * adc.lsb / math.sqrt(12)
        assert abs(m.value - 0.7) < m.uncertainty

    def test_clipped_is_invalid(self):
        adc = AdcInfo(12, 3.3)
        cap, _, _ = tone(5000, 50.3, amplitude=2.0, offset=1.65)
        capq = Capture(quantise(cap.samples, adc), cap.sample_rate, adc=adc)
        m = amplitude(capq)
        assert not m.valid and "clipped" in m.reason


    def test_dead_unit_is_a_bound(self):
        # a unit that never starts: mid-rail DC and noise; the amplitude is a valid bound
        # that covers the (zero) truth and lies far below a 0.6 V lower limit
        rng = np.random.default_rng(5)
        x = 1.65 + rng.normal(0, 0.002, 20_000)
        m = amplitude(Capture(x, 50_000.0))
        assert m.valid and m.details["no_oscillation"]
        assert m.value - m.uncertainty <= 0.0 and m.value + m.uncertainty < 0.01

    def test_undetectable_tone_inside_bound(self):
        # a tone below the detection threshold still lies inside the stated bound
        rng = np.random.default_rng(6)
        cap, _, _ = tone(2000, 50.3, amplitude=0.02)
        x = cap.samples + rng.normal(0, 1.0, cap.n)
        m = amplitude(Capture(x, cap.sample_rate))
        assert m.valid and m.details["no_oscillation"]
        assert abs(m.value - 0.02) <= m.uncertainty


class TestVpp:
    def test_sine(self):
        cap, _, _ = tone(10_000, 100.0, amplitude=1.2, offset=0.5)
        m = vpp(cap)
        # a sampled sine's per-cycle peaks fall short of 2A by at most A(1−cos(π/P)) (derived)
        assert_allclose(m.value, 2.4, rtol=1e-3)

    def test_square(self):
        x = np.tile(np.r_[np.zeros(10), np.full(10, 3.0)], 50)
        m = vpp(Capture(x, 1000.0))
        assert_allclose(m.value, 3.0, rtol=1e-12)


class TestRms:
    def test_sine_rms(self):
        # handbook: rms of a sine = A/√2, DC removed
        cap, _, _ = tone(10_000, 100.37, amplitude=1.0, offset=2.0)
        m = rms(cap)
        assert_allclose(m.value, 1 / math.sqrt(2), rtol=1e-4)

    def test_covers_noisy(self):
        rng = np.random.default_rng(2)
        inside = []
        for _ in range(100):
            cap, _, sigma = tone(2000, 50.3, snr_db=20, rng=rng, phase=rng.uniform(0, 6.3))
            truth = math.sqrt(0.5 + sigma ** 2)
            m = rms(cap)
            inside.append(abs(m.value - truth) <= m.uncertainty)
        assert 0.88 <= np.mean(inside) <= 1.0  # JCGM 100:2008 k = 2; 100 trials


class TestDcOffset:
    def test_unipolar_square(self):
        # PF-2 style 0..3 V pulse train at 53.4 % duty: mean = 3 V × duty (derived)
        period = 500
        high = int(round(0.534 * period))
        x = np.tile(np.r_[np.full(high, 3.0), np.zeros(period - high)], 40)
        m = dc_offset(Capture(x, 50_000.0))
        assert m.valid
        assert_allclose(m.value, 3.0 * high / period, rtol=1e-3)

    def test_offset_sine(self):
        cap, _, _ = tone(10_000, 77.7, offset=1.65)
        assert_allclose(dc_offset(cap).value, 1.65, atol=1e-4)


class TestUnsteadyAndDead:
    FS = 50_000.0

    def _t(self, seconds=0.5):
        return np.arange(int(self.FS * seconds)) / self.FS

    def test_dropouts_make_amplitude_invalid(self):
        # a connector that loses contact for 10 ms every 60 ms: no steady amplitude to state
        t = self._t()
        gate = np.where(np.mod(t, 0.06) < 0.01, 0.0, 1.0)
        x = 1.65 + gate * np.sin(2 * np.pi * 955 * t) + np.random.default_rng(1).normal(0, 0.002, t.size)
        m = amplitude(Capture(x, self.FS))
        assert not m.valid and "not steady" in m.reason

    def test_oscillation_that_dies_is_zero(self):
        # rings at power-on, then decays to a flat mid-rail: amplitude 0 with a bound of half
        # the span, far below a 0.6 V lower limit (TB-3 window, invented)
        adc = AdcInfo(12, 3.3)
        t = self._t()
        x = quantise(1.65 + 0.3 * np.exp(-t / 0.01) * np.sin(2 * np.pi * 700 * t), adc)
        m = amplitude(Capture(x, self.FS, adc=adc))
        assert m.valid and m.details["no_oscillation"] and abs(m.value) < 1e-6
        assert m.value + m.uncertainty < 0.6

    def test_good_noisy_tone_stays_valid(self):
        rng = np.random.default_rng(3)
        t = self._t()
        x = 1.65 + np.sin(2 * np.pi * 955 * t) + rng.normal(0, 0.05, t.size)
        assert amplitude(Capture(x, self.FS)).valid


class TestWholeCycleEnds:
    """Regression: the whole cycles used end on a whole sample, up to half a sample away from
    the true period; at high SNR that left-over bit of the fundamental biased DC and rms far
    beyond their stated U (before the fix: DC off by 2.3e-3 V at U 2e-4 V on 64 samples)."""

    def test_dc_offset_of_short_noiseless_record(self):
        # handbook: the mean of C + A·sin over whole periods is C
        cap, _, _ = tone(64, 3.3, amplitude=1.0, offset=1.65, phase=1.1)
        m = dc_offset(cap)
        assert m.valid
        assert abs(m.value - 1.65) < 1e-9

    def test_dc_offset_covers_at_high_snr(self):
        # handbook: mean of the capture = C; coverage of U at k = 2 about 95 % (JCGM 100:2008)
        rng = np.random.default_rng(11)
        inside = []
        for _ in range(40):
            cap, _, _ = tone(200, 7.37, offset=-2.0, snr_db=70, rng=rng, phase=rng.uniform(0, 6.3))
            m = dc_offset(cap)
            inside.append(abs(m.value + 2.0) <= m.uncertainty)
        assert np.mean(inside) >= 0.8

    def test_rms_of_short_noiseless_record(self):
        # handbook: rms of a sine = A/√2 (DC removed)
        cap, _, _ = tone(100, 10.5, amplitude=1.0, offset=0.7, phase=0.2)
        m = rms(cap)
        assert m.valid
        assert abs(m.value - 1 / math.sqrt(2)) < 1e-9


class TestCoarselySampled:
    def test_amplitude_of_2_5_samples_per_period(self):
        # regression: a 4-sample envelope span over a 2.5-sample period rippled by tens of
        # per cent and flagged "amplitude still changing"; handbook: the fitted peak is A
        cap, _, _ = tone(64, 25.6, amplitude=1.0)
        m = amplitude(cap)
        assert m.valid, m.reason
        assert_allclose(m.value, 1.0, rtol=1e-9)

    @pytest.mark.parametrize("cycles", [1000.3, 2500.3])
    def test_vpp_peaks_between_samples(self, cycles):
        # regression: per-cycle peak samples of a 10-sample-per-period sine fell 1.6 % short of
        # 2A at U 0.1 %. Handbook: vpp of a sine = 2A; the shortfall of the raw peak sample
        # is at most A(1 − cos(π/P)) (derived), now covered by U
        cap, _, _ = tone(10_000, cycles, amplitude=1.0, phase=0.4)
        m = vpp(cap)
        assert m.valid
        assert abs(m.value - 2.0) <= m.uncertainty


class TestSettling:
    def test_amplitude_of_slow_exponential_approach(self):
        # regression: the steady part began inside the 1 % band of a still-settling amplitude
        # (A(t) = 1 − e^{−(t − 0.1)/τ}, τ = 0.1 s); the fit was 0.4 % low at U 0.014 %.
        # Known answer: the final amplitude 1 (closed-form envelope)
        fs = 1e4
        t = np.arange(10_000) / fs
        env = np.where(t < 0.1, 0.0, 1.0 - np.exp(-(t - 0.1) / 0.1))
        x = env * np.sin(2 * np.pi * 1000.3 * t) + np.random.default_rng(3).normal(0, 1e-3, t.size)
        m = amplitude(Capture(x, fs))
        assert m.valid
        assert abs(m.value - 1.0) <= m.uncertainty

    def test_steady_tones_get_no_settling_term(self):
        # a steady sine has nothing left to settle: its U stays the Cramér–Rao term
        # √(2σ²/N)·2 (Rife and Boorstyn 1974), also for coarsely sampled tones, whose envelope
        # ripples (that ripple once passed for settling)
        rng = np.random.default_rng(2)
        fs, n = 1e4, 20_000
        t = np.arange(n) / fs
        flagged = 0
        for f in (1234.5, 2500.3, 3456.7, 4321.0, 2999.9, 3333.1):
            x = np.sin(2 * np.pi * f * t + 1.0) + rng.normal(0, 0.0071, n)
            m = amplitude(Capture(x, fs))
            assert m.valid
            flagged += "settling_v" in m.details
        assert flagged == 0


class TestDriftingTone:
    """Levels of a tone whose frequency drifts: every valid value within U of the truth."""

    @staticmethod
    def _chirp(rate, *, fs, n, f0, amp=1.45, offset=0.2, noise=0.01, seed=0, phase=0.3):
        # instantaneous frequency f0 + rate·t: phase 2π(f0·t + rate·t²/2) (derived)
        t = np.arange(n) / fs
        rng = np.random.default_rng(seed)
        x = offset + amp * np.cos(2 * np.pi * (f0 * t + 0.5 * rate * t * t) + phase)
        return Capture(x + rng.normal(0.0, noise, n), fs)

    @pytest.mark.parametrize("fs, n, f0", [(10_000.0, 4096, 1000.0), (10_000.0, 20_000, 100.0),
                                           (50_000.0, 16_384, 650.0)])
    def test_levels_cover_the_truth_over_a_grid_of_drift_rates(self, fs, n, f0):
        # regression: 2–13 Hz/s gave a valid amplitude biased by several U (1.45 V read as
        # 1.36 V ± 0.08 V), so a unit above a 1.4 V limit passed. Truth by construction:
        # amplitude 1.45 V, AC rms 1.45/√2 V, DC 0.2 V (a sine's rms, handbook formula)
        # amplitude 1.45 V, AC rms 1.45/√2 V, DC 0.2 V (a sine's rms, handbook formula).
        # U is k = 2 (≈ 95 %, JCGM 100:2008): stated coverage ≥ 85 % over the 30 captures (about
        # 2.5 binomial standard deviations below 95 %),
        # and no valid value off by more than 3 U (a bias, not bad luck)
        truth = {"amplitude": 1.45, "rms": 1.45 / math.sqrt(2.0), "dc_offset": 0.2}
        funcs = {"amplitude": amplitude, "rms": rms, "dc_offset": dc_offset}
        inside = {name: [] for name in funcs}
        for i, rate in enumerate((0.0, 0.5, 1.0, 2.0, 3.0, 5.0, 8.0, 13.0, 30.0, -4.0)):
            for seed in range(3):
                cap = self._chirp(rate, fs=fs, n=n, f0=f0, seed=10 * i + seed, phase=0.3 + i + seed)
                for name, func in funcs.items():
                    m = func(cap)
                    if m.valid and m.uncertainty is not None:
                        err = abs(m.value - truth[name])
                        assert err <= 3.0 * m.uncertainty, (name, rate, m)
                        inside[name].append(err <= m.uncertainty)
                a = amplitude(cap)
                if a.valid and not a.details.get("no_oscillation"):
                    # a valid fitted amplitude is the real one, not a smeared fraction of it
                    assert abs(a.value - 1.45) < 0.01, (rate, a)
        for name, hits in inside.items():
            assert hits and np.mean(hits) >= 0.85, (name, np.mean(hits))

    def test_issue_case_does_not_pass_a_1_4_v_limit(self):
        # the reported capture's kind: a true 1.45 V tone drifting a few Hz/s must not read as
        # ≤ 1.4 V with an uncertainty that hides it
        cap = self._chirp(5.0, fs=10_000.0, n=20_000, f0=100.0)
        m = amplitude(cap)
        assert not m.valid or m.value - m.uncertainty > 1.4 or m.value + m.uncertainty >= 1.45

    def test_untrackable_chirp_amplitude_is_invalid_or_a_covering_bound(self):
        # 40 Hz/s over 2 s: 80 Hz of sweep, far too fast to follow segment to segment
        cap = self._chirp(40.0, fs=10_000.0, n=20_000, f0=100.0)
        m = amplitude(cap)
        assert not m.valid or m.value + m.uncertainty >= 1.45


class TestUnderTwoCycles:
    """Monte Carlo over phases: the DC offset and the no-oscillation bound cover the truth or
    are invalid when the capture holds fewer than two cycles (or is just past two)."""

    @staticmethod
    def _records(cycles, noise=0.01, count=60):
        n = 2000
        t = np.arange(n)
        for seed in range(count):
            rng = np.random.default_rng(seed)
            x = 0.5 + np.sin(2 * np.pi * cycles * t / n + rng.uniform(0, 2 * np.pi)) + rng.normal(0, noise, n)
            yield Capture(x, 1000.0)

    @pytest.mark.parametrize("cycles", [0.3, 0.6, 0.9, 1.2, 1.5, 1.9, 2.2, 2.6, 2.9])
    def test_dc_offset_covers_or_is_invalid(self, cycles):
        # regression: below one cycle the stated DC (0.5 V by construction) was covered in 53 %
        # of phases or fewer. k = 2 (JCGM 100:2008): ≥ 90 % of the valid values within U
        inside = []
        for cap in self._records(cycles):
            m = dc_offset(cap)
            if m.valid:
                inside.append(abs(m.value - 0.5) <= m.uncertainty)
        if cycles < 2.0:
            assert inside == []
        else:
            assert len(inside) == 60 and np.mean(inside) >= 0.9

    @pytest.mark.parametrize("cycles", [0.3, 0.6, 0.9, 1.5])
    def test_amplitude_bound_covers_or_is_invalid(self, cycles):
        # the true amplitude is 1 V by construction; a "no oscillation" bound must contain it
        for cap in self._records(cycles, count=30):
            m = amplitude(cap)
            assert not m.valid or m.value + m.uncertainty >= 1.0, (cycles, m)


class TestVppInNoise:
    @pytest.mark.parametrize("shape", ["sine", "square"])
    def test_noise_lift_is_inside_u(self, shape):
        # regression: with 10 mV of noise the per-cycle peaks of a 2.9 V peak-to-peak waveform
        # read about 15 mV (sine) to 50 mV (square, flat tops) high at U ≈ 1.4 mV. Truth by
        # construction: 2.9 V (a sine's vpp is 2A, handbook formula)
        fs, n = 10_000.0, 20_000
        t = np.arange(n) / fs
        inside = []
        for seed in range(10):
            rng = np.random.default_rng(seed)
            s = np.sin(2 * np.pi * 100.3 * t + seed)
            x = 1.45 * (s if shape == "sine" else np.sign(s)) + rng.normal(0, 0.01, n)
            m = vpp(Capture(x, fs))
            assert m.valid
            inside.append(abs(m.value - 2.9) <= m.uncertainty)
        assert all(inside)
