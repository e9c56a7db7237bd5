"""Duty cycle of pulse trains with finite edges (IEEE 181 state levels, 50 % crossings)."""

from __future__ import annotations

import numpy as np
import pytest
from numpy.testing import assert_allclose

from benchgate.analysis import AdcInfo, Capture, analyze
from benchgate.analysis.pulse import duty_cycle


def trapezoid(f, duty, rise, *, fs=50_000.0, duration=0.1, low=0.0, high=3.0, noise=0.0, seed=0):
    """Pulse train with linear edges of ``rise`` seconds (0–100 %), 50 % crossings at 0 and duty·T."""
    period = 1.0 / f
    t = np.arange(int(fs * duration)) / fs + 0.123 * period
    lowtime = period * (1 - duty)
    p = np.mod(t + lowtime / 2, period) - lowtime / 2
    frac = np.clip(0.5 + np.minimum(p, duty * period - p) / rise, 0.0, 1.0)
    x = low + (high - low) * frac
    if noise:
        x = x + np.random.default_rng(seed).normal(0, noise, t.size)
    return Capture(x, fs)


class TestDutyCycle:
    @pytest.mark.parametrize("duty", [0.1, 0.5, 0.534, 0.9])
    def test_finite_edges(self, duty):
        # IEEE Std 181-2011: duty = pulse duration / period at the 50 % reference level;
        # symmetric linear edges put the 50 % crossings at the nominal instants
        cap = trapezoid(988.0, duty, rise=60e-6)
        m = duty_cycle(cap)
        assert m.valid
        assert_allclose(m.value, 100 * duty, atol=0.02)
        assert_allclose(m.details["low_state_v"], 0.0, atol=0.02)
        assert_allclose(m.details["high_state_v"], 3.0, atol=0.02)

    def test_noisy_pf2_like(self):
        # PF-2 (invented): 988 Hz, duty (R1+R2)/(R1+2R2) = 53.4 %, 0–3 V at the ADC
        cap = trapezoid(988.0, 0.534, rise=20e-6, noise=0.01, duration=0.2)
        m = duty_cycle(cap)
        assert_allclose(m.value, 53.4, atol=max(m.uncertainty, 0.05))

    def test_square_wave_full_analysis(self):
        adc = AdcInfo(12, 3.3)
        x = trapezoid(988.0, 0.534, rise=20e-6, noise=0.002, duration=0.2).samples
        codes = np.clip(np.round(x / adc.lsb), 0, 4095) * adc.lsb
        a = analyze(Capture(codes, 50_000.0, adc=adc))
        m = a.measurements
        assert m["frequency"].valid and abs(m["frequency"].value - 988.0) < 0.05
        assert m["thd"].valid and m["thd"].value > 20  # a square wave is very distorted, validly
        assert m["dc_offset"].valid and 1.5 < m["dc_offset"].value < 1.7  # 0..3 V: DC ≈ 3 V × duty
        assert_allclose(m["duty_cycle"].value, 53.4, atol=0.1)

    def test_sine_is_fifty(self):
        t = np.arange(20_000) / 50_000.0
        m = duty_cycle(Capture(np.sin(2 * np.pi * 977.7 * t), 50_000.0))
        assert_allclose(m.value, 50.0, atol=0.05)  # symmetric waveform (derived)

    def test_too_few_periods(self):
        m = duty_cycle(trapezoid(988.0, 0.5, rise=20e-6, duration=0.0015))
        assert not m.valid and "periods" in m.reason


class TestDutyNeedsPeriods:
    def test_two_periods_are_not_enough(self):
        # regression: two complete periods gave a valid duty cycle; at least three are needed
        cap = trapezoid(988.0, 0.5, rise=20e-6, duration=2.6 / 988.0)
        m = duty_cycle(cap)
        assert not m.valid and "fewer than 3 complete periods" in m.reason

    def test_three_periods_are(self):
        # IEEE Std 181-2011: duty = pulse duration / period; symmetric edges keep 50 %
        m = duty_cycle(trapezoid(988.0, 0.5, rise=20e-6, duration=4.2 / 988.0))
        assert m.valid and m.details["periods"] >= 3
        assert_allclose(m.value, 50.0, atol=max(m.uncertainty, 0.1))
