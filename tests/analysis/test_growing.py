"""The growing capture's four-parameter fit (sums kept over looks) against the fit from scratch
on the same grown capture."""

from __future__ import annotations

import math

import numpy as np
import pytest

from benchgate.analysis import AdcInfo, Capture, _growing, analyze, sinefit
from benchgate.analysis._growing import GrowingFit, KeptSums
from benchgate.analysis._track import segment_phases
from benchgate.analysis.spectrum import coarse_frequency

FS = 50_000.0


def _tone(n: int, seed: int, f: float = 1234.5, drift: float = 0.0) -> np.ndarray:
    rng = np.random.default_rng(seed)
    t = np.arange(n) / FS
    phase = 2 * math.pi * (f * t + 0.5 * drift * t * t)
    x = 1.65 + 0.8 * np.cos(phase + 0.4) + 0.01 * np.cos(3 * phase) + rng.normal(0, 4e-4, n)
    adc = AdcInfo(12, 3.3)
    return np.round(x / adc.lsb) * adc.lsb


def _crb_sd(fit: sinefit.SineFit) -> float:
    # Händel (2000) / Rife & Boorstyn (1974): var ω = 24σ²/(A² N (N²−1)), rad/sample
    n = fit.n
    return math.sqrt(24 * fit.residual_var / (fit.amplitude ** 2 * n * (n * n - 1)))


def _assert_same_fit(a: sinefit.SineFit, b: sinefit.SineFit) -> None:
    # the same iteration on sums equal to rounding: the same steps and the same result
    assert a.converged and b.converged
    assert a.iterations == b.iterations and a.n == b.n
    assert abs(a.omega - b.omega) <= 1e-9 * _crb_sd(b)
    assert a.amplitude == pytest.approx(b.amplitude, rel=1e-12)
    assert a.offset == pytest.approx(b.offset, abs=1e-12)
    assert a.phase == pytest.approx(b.phase, abs=1e-9)
    assert a.residual_var == pytest.approx(b.residual_var, rel=1e-8)


class TestGrowingFit:
    @pytest.mark.parametrize("start", [0, 37, 1024, 3001])
    def test_equals_fit_from_scratch_at_every_look(self, start):
        x = _tone(30_000, 1, drift=2.0)  # a slow drift moves the fitted frequency look by look
        g = GrowingFit()
        for n in range(5000, x.size + 1, 2500):
            look = x[:n].copy()  # each look is a new array, as the recorder hands it over
            w0 = 2 * math.pi * coarse_frequency(look[start:], FS) / FS
            _assert_same_fit(g.fit4(look, start, w0), sinefit.fit4(look[start:], w0))
        assert g.blocks_added == x.size // _growing.BLOCK
        # the frequency stayed within the Taylor radius after the first look: no full pass
        assert g.rebuilds == 1

    def test_frequency_beyond_the_radius_sums_again(self):
        x = _tone(5000, 2)  # short, so 1.5 radii is still a fraction of a bin (fit4 converges)
        g = GrowingFit()
        w = 2 * math.pi * 1234.5 / FS
        g.fit4(x, 0, w)
        far = w + 1.5 * _growing.RADIUS / (_growing.BLOCK / 2.0)
        _assert_same_fit(g.fit4(x, 0, far), sinefit.fit4(x, far))
        # summed afresh at the far start, and again when the steps come back beyond the radius
        assert g.rebuilds == 3

    def test_sums_at_the_radius_equal_direct_sums(self):
        # the Taylor re-centring at the edge of its radius against direct summation (numpy)
        x = _tone(10_000, 3)
        g = GrowingFit()
        w = 0.15
        g.fit4(x, 0, w)
        g._recentre(x, w)
        for delta in (-1.0, -0.5, 0.5, 1.0):
            omega = w + delta * _growing.RADIUS / (_growing.BLOCK / 2.0)
            mean = float(x[5:].mean())
            p, q = g._at(x, 5, mean, omega)
            t = np.arange(5, x.size) - (5 + (x.size - 5 - 1) / 2.0)
            e = np.exp(1j * omega * t) * (x[5:] - mean)
            scale = float(np.sum(np.abs(x[5:] - mean)))
            assert abs(p - np.sum(e)) <= 1e-12 * scale
            assert abs(q - np.dot(t, e)) <= 1e-12 * scale * x.size
        assert g.omega == w  # all inside the radius: no new pass

    def test_not_converged_gives_the_same_parameters(self):
        # a tone swept over many bins stops at the iteration cap; the parameters still match
        # (its residual comes from the normal equations instead of a residual pass)
        x = _tone(20_000, 7, drift=400.0)
        w = 2 * math.pi * coarse_frequency(x, FS) / FS
        a, b = GrowingFit().fit4(x, 0, w, max_iter=3), sinefit.fit4(x, w, max_iter=3)
        assert not a.converged and not b.converged and a.omega == pytest.approx(b.omega, rel=1e-13)
        assert a.amplitude == pytest.approx(b.amplitude, rel=1e-10)
        assert a.residual_var == pytest.approx(b.residual_var, rel=1e-6)

    def test_a_capture_that_is_no_extension_starts_afresh(self):
        x = _tone(12_000, 4)
        g = GrowingFit()
        w = 2 * math.pi * 1234.5 / FS
        g.fit4(x[:8000], 0, w)
        other = _tone(12_000, 5)  # not the same samples: the kept sums must not be used
        _assert_same_fit(g.fit4(other, 0, w), sinefit.fit4(other, w))


    @pytest.mark.parametrize("start", [0, 700])
    def test_phase_track_segments_from_the_kept_sums(self, start):
        # segment phases from the growing fit's kept block sums against a fresh workspace at the
        # same frequency (numpy cos/sin sums through the block product)
        x = _tone(40_000, 8, drift=3.0)
        g = GrowingFit()
        g.fit4(x[:20_000], start, 2 * math.pi * 1234.5 / FS)
        g.fit4(x, start, 2 * math.pi * 1234.6 / FS)
        y = x[start:]
        kept = KeptSums(g, y.size)
        fresh = sinefit.Workspace(y.size)
        fresh.set(kept.omega)
        for segments in (4, 16, 64, 1000):
            a = segment_phases(y, kept.omega, segments, kept)
            b = segment_phases(y, kept.omega, segments, fresh)
            np.testing.assert_allclose(a[0], b[0], rtol=0, atol=1e-10)
            np.testing.assert_allclose(a[1], b[1], rtol=1e-10)


class TestAnalyzeGrowing:
    def test_measurements_equal_analysis_from_scratch(self):
        x = _tone(25_000, 6)
        adc = AdcInfo(12, 3.3)
        g = GrowingFit()
        names = ("frequency", "amplitude", "thd", "dc_offset", "frequency_drift")
        for n in range(2500, x.size + 1, 2500):
            cap = Capture(x[:n], FS, adc=adc, clock_ppm=50)
            grown = analyze(cap, names, growing=g).measurements
            fresh = analyze(cap, names).measurements
            for name in names:
                a, b = grown[name], fresh[name]
                assert a.valid == b.valid and a.reason == b.reason
                if b.valid:
                    # equal to rounding (the fits agree to 1e-12 relative)
                    assert a.value == pytest.approx(b.value, rel=1e-9, abs=1e-12)
                    assert a.uncertainty == pytest.approx(b.uncertainty, rel=1e-6)
        assert g.rebuilds <= 2
