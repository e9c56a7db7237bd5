"""Input validation: too few samples, NaN, flat line, clipping at the rails, flat tops."""

from __future__ import annotations

import numpy as np
import pytest
from _analysis_signals import quantise

from benchgate.analysis import AdcInfo, Capture, analyze
from benchgate.analysis._validate import state_levels, validate_capture

FS = 50_000.0
T = np.arange(10_000) / FS


class TestCheckCapture:
    def test_clean_sine(self):
        c = validate_capture(Capture(np.sin(2 * np.pi * 955 * T), FS))
        assert c.fatal is None and c.warnings == () and c.clipped is None

    def test_too_few(self):
        assert "too few samples" in validate_capture(Capture(np.arange(5.0), FS)).fatal

    def test_nan_and_inf(self):
        x = np.sin(T)
        x[7] = np.nan
        x[9] = np.inf
        assert "2 NaN or infinite" in validate_capture(Capture(x, FS)).fatal

    def test_flat_line_with_adc(self):
        adc = AdcInfo(12, 3.3)
        x = np.full(T.size, 1.65) + adc.lsb * (np.arange(T.size) % 2)  # one LSB of toggling
        assert "flat line" in validate_capture(Capture(x, FS, adc=adc)).fatal

    def test_clipped_at_rails(self):
        adc = AdcInfo(12, 3.3)
        x = quantise(1.65 + 1.8 * np.sin(2 * np.pi * 955 * T), adc)
        c = validate_capture(Capture(x, FS, adc=adc))
        assert "clipped at the ADC low and high rail" in c.clipped
        assert c.clipped in c.warnings

    def test_flat_tops_without_adc(self):
        x = np.clip(np.sin(2 * np.pi * 955 * T), -0.9, 0.9)
        assert "flat tops" in validate_capture(Capture(x, FS)).clipped

    def test_square_wave_is_not_clipping(self):
        x = np.where(np.sin(2 * np.pi * 988 * T) > 0, 3.0, 0.0)
        c = validate_capture(Capture(x, FS))
        assert c.pulse_like and c.clipped is None

    def test_pulse_at_rail_only_warns(self):
        adc = AdcInfo(12, 3.3)
        x = quantise(np.where(np.sin(2 * np.pi * 988 * T) > 0, 3.0, 0.0), adc)
        c = validate_capture(Capture(x, FS, adc=adc))
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


class TestFullScaleSineIsNotClipping:
    """Samples at the end codes are compared with what the fitted sine predicts there."""

    ADC = AdcInfo(10, 1.0)
    N = 16_384

    def _sine(self, scale, *, noise=0.0, seed=0, phase=0.1):
        adc = self.ADC
        a = 0.5 * (adc.high_rail - adc.low_rail) * scale  # scale 1: peaks at the end code centres
        c = 0.5 * (adc.high_rail + adc.low_rail)
        t = np.arange(self.N)
        x = c + a * np.sin(2 * np.pi * 1021 * t / self.N + phase)
        if noise:
            x = x + np.random.default_rng(seed).normal(0.0, noise * adc.lsb, self.N)
        return Capture(quantise(x, adc), 100_000.0, adc=adc), a

    def test_sine_touching_the_top_code_is_not_clipped(self):
        cap, a = self._sine(1.0)
        at_top = int(np.count_nonzero(cap.samples >= self.ADC.high_rail - 0.5 * self.ADC.lsb))
        # IEEE Std 1241-2010 histogram test (arcsine density): a sine reaching 1/2 LSB past the
        # top transition spends arccos(1 − 0.5/511.5)/π of its time there: 230.7 of 16 384
        assert abs(at_top - 16_384 * np.arccos(1 - 0.5 / 511.5) / np.pi) <= 3
        validation = validate_capture(cap)
        assert validation.clipped is None and validation.warnings == ()
        m = analyze(cap).measurements
        assert m["amplitude"].valid and abs(m["amplitude"].value - a) <= m["amplitude"].uncertainty
        # ideal 10-bit quantiser SNR = 6.02·N + 1.76 = 61.96 dB (IEEE Std 1241-2010)
        assert m["sinad"].valid and abs(m["sinad"].value - 61.96) < 0.3
        assert m["enob"].valid and abs(m["enob"].value - 10.0) < 0.05

    @pytest.mark.parametrize("seed", range(4))
    def test_noisy_full_scale_sine_is_not_clipped(self, seed):
        cap, _ = self._sine(1.0, noise=0.5, seed=seed, phase=seed)
        assert validate_capture(cap).clipped is None

    @pytest.mark.parametrize("scale", [1.003, 1.02, 1.2])
    def test_sine_past_the_rails_is_clipped(self, scale):
        cap, _ = self._sine(scale)  # peaks 1.5, 10 and 100 LSB past the end codes' centres
        c = validate_capture(cap)
        assert c.clipped and "clipped at the ADC low and high rail" in c.clipped
        assert not analyze(cap).measurements["amplitude"].valid

    def test_one_sided_clipping(self):
        adc = self.ADC
        t = np.arange(self.N)
        x = quantise(0.62 + 0.45 * np.sin(2 * np.pi * 1021 * t / self.N), adc)  # top at 1.07 V > rail
        c = validate_capture(Capture(x, 100_000.0, adc=adc))
        assert c.clipped and "high rail" in c.clipped and "low" not in c.clipped
