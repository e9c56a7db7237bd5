"""The faster paths of the analysis against plain numpy computations of the same quantities
(direct sums, sorting medians, cumulative sums): the same values, to rounding."""

from __future__ import annotations

import math

import numpy as np
import pytest
from numpy.testing import assert_allclose, assert_array_equal

from benchgate.analysis import _steady, sinefit
from benchgate.analysis._robust import mad_at_least, mad_of_differences_at_least
from benchgate.analysis._track import segment_phases, segment_trig_sums
from benchgate.analysis._validate import _histogram
from benchgate.analysis.levels import _cycle_extremes, _std
from benchgate.analysis.pulse import crossings


def _t(n: int) -> np.ndarray:
    return np.arange(n) - (n - 1) / 2.0


class TestPhasorSums:
    @pytest.mark.parametrize("n", [17, 1000, 10_007, 100_003])
    def test_projections_match_direct_sums(self, n):
        # numpy cos/sin and sums as the reference
        rng = np.random.default_rng(n)
        y = rng.normal(size=n) + 3.0
        for omega in (1e-3, 0.3, 2.9):
            w = sinefit.Workspace(n)
            w.set(omega)
            c, s = np.cos(omega * _t(n)), np.sin(omega * _t(n))
            scale = float(np.sum(np.abs(y)))
            assert_allclose(w.project(y), [y @ c, y @ s], atol=1e-12 * scale)
            p, q = w.project_with_t(y)
            assert abs(p - complex(y @ c, y @ s)) <= 1e-12 * scale
            ty = _t(n) * y
            assert abs(q - complex(ty @ c, ty @ s)) <= 1e-12 * scale * n
            # (the reference's own argument ω·t carries a rounding error of about eps·ω·n/2)
            assert_allclose(w.c, c, atol=1e-12 + 1e-15 * omega * n)
            assert_allclose(w.s, s, atol=1e-12 + 1e-15 * omega * n)

    def test_segment_trig_sums_match_direct_sums(self):
        # Dirichlet-kernel closed forms (derived) against direct numpy sums per segment
        n = 10_001
        bounds = np.array([0, 7, 1000, 1001, 4096, 10_001])
        for omega in (1e-3, 0.05, 1.3, 3.0):
            got = segment_trig_sums(omega, bounds, n)
            c, s = np.cos(omega * _t(n)), np.sin(omega * _t(n))
            for k, (lo, hi) in enumerate(zip(bounds[:-1], bounds[1:], strict=True)):
                want = [c[lo:hi] @ c[lo:hi], s[lo:hi] @ s[lo:hi], c[lo:hi] @ s[lo:hi], c[lo:hi].sum(), s[lo:hi].sum()]
                assert_allclose([g[k] for g in got], want, atol=1e-9)

    @pytest.mark.parametrize("n", [1000, 12_345, 1_000_000])
    def test_segment_phases_from_the_fits_kept_sums(self, n):
        # the sums the four-parameter fit keeps against a fresh pass at the same frequency
        rng = np.random.default_rng(1)
        k = np.arange(n)
        w = 2 * math.pi * 37.3 / 1000
        y = 1.6 + 0.7 * np.cos(w * k + 0.3 + 1e-7 * k * k / n) + rng.normal(0, 0.01, n)
        work = sinefit.Workspace(n)
        fit = sinefit.fit4(y, w * (1 + 1e-4 / n), work=work)
        fresh = sinefit.Workspace(n)
        fresh.set(work.omega)
        for segments in (4, 16, 64, 256):
            a = segment_phases(y, fit.omega, segments, work)
            b = segment_phases(y, fit.omega, segments, fresh)
            assert_allclose(a[0], b[0], atol=1e-10)
            assert_allclose(a[1], b[1], rtol=1e-10)


class TestMadBound:
    def test_never_claims_a_bound_the_median_misses(self):
        # against numpy's median: a proof must never be wrong, across shapes, ties, sizes
        rng = np.random.default_rng(7)
        claimed = 0
        for trial in range(300):
            n = int(rng.integers(256, 20_000))
            kind = trial % 4
            if kind == 0:
                d = rng.normal(size=n)
            elif kind == 1:
                d = np.round(rng.normal(size=n) * 3)  # many ties
            elif kind == 2:
                d = np.sin(np.arange(n) * rng.uniform(0.01, 1.0)) + rng.normal(0, 0.01, n)
            else:
                d = rng.exponential(size=n) * rng.choice([-1, 1], size=n)
            mad = float(np.median(np.abs(d - np.median(d))))
            y = np.concatenate(([0.0], np.cumsum(d)))  # np.diff(y) is d (to rounding)
            dy = np.diff(y)
            mad_y = float(np.median(np.abs(dy - np.median(dy))))
            for bound in (0.0, 0.25 * mad, 0.9 * mad, mad, 1.1 * mad, 4 * mad):
                if mad_at_least(d, bound):
                    claimed += 1
                    assert mad >= bound
                if mad_of_differences_at_least(y, bound):
                    assert mad_y >= bound
        assert claimed > 300  # it does prove the bound in the common cases

    def test_proves_a_sine_slope_above_its_noise(self):
        # the case it is for: first differences of a sampled sine dwarf the noise
        d = np.diff(np.sin(np.arange(100_000) * 0.12) + np.random.default_rng(0).normal(0, 0.002, 100_000))
        assert mad_at_least(d, 0.01)
        assert mad_of_differences_at_least(np.concatenate(([0.0], np.cumsum(d))), 0.01)


class TestChunkedPasses:
    def test_cycle_extremes_match_a_loop(self):
        rng = np.random.default_rng(3)
        for period in (5.3, 52.34, 200.0):
            y = np.round(np.sin(2 * np.pi * np.arange(20_000) / period) * 50 + rng.normal(0, 3, 20_000))
            k = int(y.size // period)
            bounds = np.round(np.arange(k + 1) * period).astype(np.int64)
            starts = bounds[:-1]
            imax, imin = _cycle_extremes(y[: bounds[-1]], starts)
            ends = np.r_[starts[1:], bounds[-1]]
            # numpy argmax (first of equal maxima) per cycle, one cycle at a time
            assert_array_equal(imax, [a + np.argmax(y[a:b]) for a, b in zip(starts, ends, strict=True)])
            assert_array_equal(imin, [a + np.argmin(y[a:b]) for a, b in zip(starts, ends, strict=True)])

    @pytest.mark.parametrize(("n", "period"), [(50, 4.0), (1000, 2.5), (1000, 37.3), (12_345, 8.0),
                                               (20_000, 5000.7), (300_001, 52.34)])
    def test_envelope_matches_cumulative_sums(self, n, period):
        rng = np.random.default_rng(n)
        x = 1.6 + np.sin(2 * np.pi * np.arange(n) / period) + rng.normal(0, 0.01, n)
        env = _steady.envelope(x, period)
        # the sliding one-period variance from full cumulative sums (numpy.cumsum)
        p = period * math.ceil(4.0 / period) if period < 4.0 else max(4.0, period)
        p = min(p, n - 1.0)
        m = int(p)
        frac = p - m
        xc = x - x.mean()
        c1, c2 = np.r_[0.0, np.cumsum(xc)], np.r_[0.0, np.cumsum(xc * xc)]
        starts = np.arange(0, n - m, max(1, m // 8))
        ends = starts + m
        s1 = (c1[ends] - c1[starts] + frac * xc[ends]) / p
        s2 = (c2[ends] - c2[starts] + frac * xc[ends] ** 2) / p
        assert_allclose(env.level, np.sqrt(2 * np.maximum(s2 - s1 * s1, 0)), atol=1e-12)

    def test_histogram_and_std_match_numpy(self):
        x = np.random.default_rng(5).normal(size=200_003)
        lo, hi = float(x.min()), float(x.max())
        want = np.bincount(np.minimum(((x - lo) * (256 / (hi - lo))).astype(np.int64), 255), minlength=256)
        assert_array_equal(_histogram(x, lo, hi, 256), want)
        assert _std(x + 1e3) == pytest.approx(float(np.std(x + 1e3)), rel=1e-12)  # numpy.std

    def test_crossings_match_the_comparison_pairs(self):
        # quantised samples land exactly on the 50 % level: ties decide which side they count on;
        # the boolean steps must find the same candidates as the explicit comparison pairs
        x = np.round(np.sin(np.arange(5000) * 0.05) * 4) / 4
        low, high = -1.0, 1.0
        rise, fall = crossings(x, low, high)
        mid = 0.0
        r = np.flatnonzero((x[:-1] < mid) & (x[1:] >= mid))
        f = np.flatnonzero((x[:-1] > mid) & (x[1:] <= mid))
        at_or_above, above = x >= mid, x > mid
        assert_array_equal(np.flatnonzero(at_or_above[1:] > at_or_above[:-1]), r)
        assert_array_equal(np.flatnonzero(above[:-1] > above[1:]), f)
        # each instant lies within the sample step of one of those crossings (IEEE 181 linear
        # interpolation between the two samples)
        assert np.all(np.min(np.abs(rise[:, None] - (r[None, :] + 0.5)), axis=1) <= 0.5)
        assert np.all(np.min(np.abs(fall[:, None] - (f[None, :] + 0.5)), axis=1) <= 0.5)
        assert rise.size > 30 and fall.size > 30

    def test_startup_smoothing_matches_the_whole_average(self):
        rng = np.random.default_rng(9)
        lv = np.clip(np.arange(50_000) / 20_000, 0, 1) + rng.normal(0, 0.01, 50_000)
        for width in (3, 64, 1001):
            got = _steady._smoothed_until(lv, width, 0.9)
            half = width // 2
            c = np.r_[0.0, np.cumsum(lv)]
            i = np.arange(lv.size)
            lo, hi = np.clip(i - half, 0, lv.size), np.clip(i + half + 1, 0, lv.size)
            whole = (c[hi] - c[lo]) / (hi - lo)
            assert_allclose(got, whole[: got.size], rtol=0, atol=0)
            first = int(np.flatnonzero(whole >= 0.9)[0])
            assert got.size > first + half  # enough for the crossing and its slope
