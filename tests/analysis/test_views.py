"""Plot data for reports."""

from __future__ import annotations

import numpy as np
from numpy.testing import assert_allclose

from benchgate.analysis import Capture
from benchgate.analysis.views import cycles, envelope, spectrum_db


class TestSpectrumDb:
    def test_fundamental_at_zero_db(self):
        fs = 10_000.0
        t = np.arange(50_000) / fs
        cap = Capture(np.sin(2 * np.pi * 955 * t) + 0.01 * np.sin(2 * np.pi * 2865 * t), fs)
        f, db = spectrum_db(cap, max_points=1000)
        assert f.size <= 1000 and f.size == db.size
        assert db.max() == 0.0
        assert abs(f[np.argmax(db)] - 955) < 10
        near = np.abs(f - 2865) < 10
        assert_allclose(db[near].max(), -40.0, atol=1.0)  # peak kept by the reduction (BH scalloping < 1 dB)

    def test_steady_start_and_bad(self):
        cap = Capture(np.r_[np.zeros(1000), np.sin(np.arange(1000))], 1000.0)
        f, db = spectrum_db(cap, steady_start=1.0)
        assert f.size == 501
        assert spectrum_db(Capture(np.ones(8), 1.0))[0].size == 0


class TestEnvelope:
    def test_min_max(self):
        x = np.sin(np.arange(10_000) * 0.3)
        t, lo, hi = envelope(Capture(x, 100.0, start_time=2.0), points=10)
        assert t.size == 10 and t[0] == 2.0
        assert_allclose(hi, [x[i * 1000:(i + 1) * 1000].max() for i in range(10)])
        assert_allclose(lo, [x[i * 1000:(i + 1) * 1000].min() for i in range(10)])


class TestCycles:
    def test_last_cycles(self):
        cap = Capture(np.arange(1000.0), 1000.0)
        t, v = cycles(cap, 100.0, n_cycles=4)
        assert v.size == 40 and v[-1] == 999.0
        t, v = cycles(cap, 100.0, n_cycles=2, start=0.1)
        assert v[0] == 100.0 and v.size == 20
        assert cycles(cap, None)[1].size == 200
