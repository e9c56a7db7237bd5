from __future__ import annotations

import numpy as np
import pytest

from benchgate.analysis import AdcInfo, Capture, Measurement


class TestAdcInfo:
    def test_unipolar_12_bit(self):
        adc = AdcInfo(bits=12, vref=3.3)
        assert adc.full_scale == 3.3
        # IEEE Std 1241-2010: ideal code width Q = FSR / 2^N
        assert adc.lsb == pytest.approx(3.3 / 4096)
        assert adc.low_rail == 0.0
        assert adc.high_rail == pytest.approx(3.3 - 3.3 / 4096)

    def test_bipolar(self):
        adc = AdcInfo(bits=10, vref=1.0, bipolar=True)
        assert adc.full_scale == 2.0 and adc.low_rail == -1.0

    @pytest.mark.parametrize("bits,vref", [(0, 3.3), (33, 3.3), (12, 0.0), (12, float("nan"))])
    def test_refuses_bad_settings(self, bits, vref):
        with pytest.raises(ValueError):
            AdcInfo(bits=bits, vref=vref)


class TestCapture:
    def test_immutable_copy(self):
        src = np.arange(10.0)
        cap = Capture(src, 1000.0)
        src[0] = 99
        assert cap.samples[0] == 0.0
        with pytest.raises(ValueError):
            cap.samples[0] = 1.0
        import dataclasses

        with pytest.raises(dataclasses.FrozenInstanceError):
            cap.sample_rate = 5

    def test_times_and_slice(self):
        cap = Capture(np.zeros(100), 50.0, start_time=1.0)
        assert cap.duration == 2.0
        part = cap.slice(50)
        assert part.n == 50 and part.start_time == pytest.approx(2.0)
        assert part.times()[0] == pytest.approx(2.0)

    def test_refuses_bad_rate(self):
        with pytest.raises(ValueError, match="sample rate"):
            Capture(np.zeros(3), 0.0)
        with pytest.raises(ValueError, match="1-D"):
            Capture(np.zeros((3, 2)), 10.0)

    def test_metadata_read_only(self):
        cap = Capture(np.zeros(3), 10.0, metadata={"file": "a.csv"})
        with pytest.raises(TypeError):
            cap.metadata["file"] = "b"
        assert cap.with_metadata(instrument="adc").metadata == {"file": "a.csv", "instrument": "adc"}


class TestMeasurement:
    def test_invalid_needs_reason(self):
        with pytest.raises(ValueError, match="reason"):
            Measurement("frequency", float("nan"), "Hz", valid=False)

    def test_valid_needs_finite_value(self):
        with pytest.raises(ValueError):
            Measurement("frequency", float("nan"), "Hz")

    def test_json_form(self):
        d = Measurement.invalid("thd", "%", "flat line").to_dict()
        assert d == {"value": None, "unit": "%", "uncertainty": None, "valid": False, "reason": "flat line"}
