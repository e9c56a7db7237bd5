"""Amplitude dip (dropouts) on envelopes with a known answer."""

from __future__ import annotations

import numpy as np
from numpy.testing import assert_allclose

from benchgate.analysis import Capture, analyze
from benchgate.analysis.registry import MEASUREMENTS
from benchgate.analysis.stability import amplitude_dip

FS, F = 50_000.0, 955.0


def tone(gain=None, duration=0.5, noise=0.0, seed=0):
    t = np.arange(int(FS * duration)) / FS
    g = np.ones_like(t) if gain is None else gain(t)
    x = 1.65 + g * np.sin(2 * np.pi * F * t + 0.4)
    if noise:
        x = x + np.random.default_rng(seed).normal(0.0, noise, t.size)
    return Capture(x, FS)


class TestAmplitudeDip:
    def test_steady_tone_has_no_dip(self):
        m = amplitude_dip(tone(noise=0.001))
        assert m.valid and m.unit == "%"
        assert m.value < 1.0 and m.value <= m.uncertainty + 0.5

    def test_dropout_reaches_full_depth(self):
        # the output is cut for 10 ms (about 10 periods): the one-period envelope falls to 0
        # there, so the dip is 100 % (derived from the definition)
        m = amplitude_dip(tone(lambda t: np.where((t > 0.30) & (t < 0.31), 0.0, 1.0), noise=0.001))
        assert m.valid
        assert_allclose(m.value, 100.0, atol=1.0)

    def test_half_amplitude_for_several_periods(self):
        # amplitude halved for 8 ms (≈ 7.6 periods, longer than the one-period span):
        # min/median = 0.5, a 50 % dip (derived from the definition)
        m = amplitude_dip(tone(lambda t: np.where((t > 0.20) & (t < 0.208), 0.5, 1.0)))
        assert m.valid
        assert_allclose(m.value, 50.0, atol=1.0)

    def test_start_up_is_not_a_dip(self):
        # a start-up from nothing (1 − e^(−t/τ)) is excluded: judging starts once the envelope
        # is within 2 % of its level, at t = τ·ln 50 (derived), so it adds at most 2 %
        m = amplitude_dip(tone(lambda t: 1.0 - np.exp(-t / 0.02)))
        assert m.valid and m.value <= 2.05
        assert m.details["from_s"] > 0.02 * np.log(10)

    def test_noise_alone_is_invalid(self):
        x = 1.65 + np.random.default_rng(3).normal(0.0, 0.01, 20_000)
        m = amplitude_dip(Capture(x, FS))
        assert not m.valid and m.reason

    def test_registered_and_in_analyze(self):
        assert MEASUREMENTS["amplitude_dip"] is amplitude_dip
        result = analyze(tone(noise=0.001), ["amplitude_dip"])
        assert result.measurements["amplitude_dip"].valid
