"""analyze(), the registry and the Analysis capture."""

from __future__ import annotations

import json
import math

import numpy as np
import pytest
from _analysis_signals import harmonic_series, tone
from numpy.testing import assert_allclose

from benchgate.analysis import Analysis, Capture, analyze
from benchgate.analysis.context import Context, get_context
from benchgate.analysis.registry import MEASUREMENTS
from benchgate.common.names import MEASUREMENT_NAMES, MEASUREMENT_UNITS


class TestAnalyze:
    def test_all_names_in_order(self):
        cap, f, _ = tone(5000, 123.4)
        a = analyze(cap)
        assert isinstance(a, Analysis)
        assert tuple(a.measurements) == MEASUREMENT_NAMES
        for name, m in a.measurements.items():
            assert m.unit == MEASUREMENT_UNITS[name]
        assert_allclose(a.fundamental, f, rtol=1e-9)

    def test_subset_and_unknown(self):
        cap, _, _ = tone(1000, 20.3)
        assert list(analyze(cap, ["thd", "frequency"]).measurements) == ["thd", "frequency"]
        with pytest.raises(ValueError, match="unknown measurement"):
            analyze(cap, ["loudness"])
        with pytest.raises(ValueError, match="harmonics"):
            analyze(cap, harmonics=0)

    def test_harmonics_listed(self):
        cap = harmonic_series(1 << 14, 101.37, {1: 1.0, 3: 0.01})
        a = analyze(cap, harmonics=5)
        orders = [h[0] for h in a.harmonics]
        assert orders == [2, 3, 4, 5]
        h3 = a.harmonics[1]
        assert_allclose(h3[2], -40.0, atol=0.05)  # 20·log10(0.01) dBc
        assert_allclose(h3[1], 3 * a.fundamental)

    def test_to_dict_shape(self):
        cap, _, _ = tone(2000, 40.3)
        d = analyze(cap).to_dict()
        assert set(d) == {"capture", "measurements"}
        assert d["capture"]["samples"] == 2000
        assert d["capture"]["sample_rate"] == 1000.0
        assert d["capture"]["duration"] == 2.0
        assert d["capture"]["warnings"] == []
        for m in d["measurements"].values():
            assert {"value", "unit", "uncertainty", "valid", "reason"} <= set(m)
        json.dumps(d, allow_nan=False)

    def test_flat_line(self):
        a = analyze(Capture(np.full(100, 1.65), 1000.0))
        assert a.fundamental is None and a.harmonics == ()
        assert a.warnings and "flat line" in a.warnings[0]
        levels = {"amplitude", "vpp", "rms", "dc_offset"}
        for name, m in a.measurements.items():
            if name in levels:  # a dead output still has levels: 0 V swing at 1.65 V
                assert m.valid
            else:
                assert not m.valid and "flat line" in m.reason
        assert a.measurements["amplitude"].value == 0.0
        assert a.measurements["dc_offset"].value == pytest.approx(1.65)

    def test_unusable_capture_all_invalid(self):
        x = np.zeros(100)
        x[3] = np.nan
        a = analyze(Capture(x, 1000.0))
        assert all(not m.valid for m in a.measurements.values())
        assert all(v["value"] is None for v in a.to_dict()["measurements"].values())

    def test_registry_matches_names(self):
        assert tuple(MEASUREMENTS) == MEASUREMENT_NAMES
        cap, _, _ = tone(1000, 30.3)
        for name, func in MEASUREMENTS.items():
            assert func(cap).name == name  # each works on its own, without a shared context

    def test_context_belongs_to_capture(self):
        a, _, _ = tone(100, 5.0)
        b, _, _ = tone(100, 5.0)
        ctx = Context(a)
        assert get_context(a, ctx) is ctx
        with pytest.raises(ValueError, match="different capture"):
            get_context(b, ctx)

    def test_tb3_like_record(self):
        # invented TB-3 capture: power-on transient, ~955 Hz, 1 V peak, 2.5 % third harmonic
        fs = 50_000.0
        t = np.arange(20_000) / fs
        env = 1.0 / (1.0 + np.exp(-(t - 0.05) / 0.008))
        ph = 2 * np.pi * 955.2 * t
        x = 1.65 + env * (np.sin(ph) - 0.025 * np.sin(3 * ph))
        a = analyze(Capture(x, fs))
        m = a.measurements
        assert a.steady_start > 0.05
        assert_allclose(m["frequency"].value, 955.2, rtol=1e-6)
        assert_allclose(m["thd"].value, 2.5, rtol=0.01)
        assert_allclose(m["dc_offset"].value, 1.65, atol=1e-3)
        assert_allclose(m["startup_time"].value, 0.05 + 0.008 * math.log(9), atol=1e-3)
