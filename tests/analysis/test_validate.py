"""Input checks: too few samples, NaN, flat line, clipping at the rails, flat tops."""

from __future__ import annotations

import numpy as np
from _analysis_signals import quantise

from benchgate.analysis import AdcInfo, Capture, analyze
from benchgate.analysis._validate import check_capture, state_levels

FS = 50_000.0
T = np.arange(10_000) / FS


class TestCheckCapture:
    def test_clean_sine(self):
        c = check_capture(Capture(np.sin(2 * np.pi * 955 * T), FS))
        assert c.fatal is None and c.warnings == () and c.clipped is None

    def test_too_few(self):
        assert "too few samples" in check_capture(Capture(np.arange(5.0), FS)).fatal

    def test_nan_and_inf(self):
        x = np.sin(T)
        x[7] = np.nan
        x[9] = np.inf
        assert "2 NaN or infinite" in check_capture(Capture(x, FS)).fatal

    def test_flat_line_with_adc(self):
        adc = AdcInfo(12, 3.3)
        x = np.full(T.size, 1.65) + adc.lsb * (np.arange(T.size) % 2)  # one LSB of toggling
        assert "flat line" in check_capture(Capture(x, FS, adc=adc)).fatal

    def test_clipped_at_rails(self):
        adc = AdcInfo(12, 3.3)
        x = quantise(1.65 + 1.8 * np.sin(2 * np.pi * 955 * T), adc)
        c = check_capture(Capture(x, FS, adc=adc))
        assert "clipped at the ADC low and high rail" in c.clipped
        assert c.clipped in c.warnings

    def test_flat_tops_without_adc(self):
        x = np.clip(np.sin(2 * np.pi * 955 * T), -0.9, 0.9)
        assert "flat tops" in check_capture(Capture(x, FS)).clipped

    def test_square_wave_is_not_clipping(self):
        x = np.where(np.sin(2 * np.pi * 988 * T) > 0, 3.0, 0.0)
        c = check_capture(Capture(x, FS))
        assert c.pulse_like and c.clipped is None

    def test_pulse_at_rail_only_warns(self):
        adc = AdcInfo(12, 3.3)
        x = quantise(np.where(np.sin(2 * np.pi * 988 * T) > 0, 3.0, 0.0), adc)
        c = check_capture(Capture(x, FS, adc=adc))
        assert c.clipped is None and any("rail" in w for w in c.warnings)

    def test_clipping_spares_frequency(self):
        adc = AdcInfo(12, 3.3)
        x = quantise(1.65 + 1.8 * np.sin(2 * np.pi * 955 * T), adc)
        m = analyze(Capture(x, FS, adc=adc)).measurements
        assert m["frequency"].valid
        assert not m["thd"].valid and "clipped" in m["thd"].reason


class TestStateLevels:
    def test_histogram_modes(self):
        # IEEE Std 181-2011: state levels are the modes of the lower and upper histogram halves
        rng = np.random.default_rng(0)
        x = np.r_[rng.normal(0.2, 0.01, 6000), rng.normal(2.9, 0.01, 4000), np.linspace(0.2, 2.9, 50)]
        low, high = state_levels(x)
        assert abs(low - 0.2) < 0.02 and abs(high - 2.9) < 0.02
