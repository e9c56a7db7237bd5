"""Frequency-sweep and level-sweep measurements against analytic responses and scipy.signal."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import signal

from benchgate.analysis.measurement import Measurement
from benchgate.analysis.sweep import (
    HALF_POWER_DB,
    FrequencySweep,
    ResponsePoint,
    f_3db_high,
    f_3db_low,
    passband_gain_db,
    ripple,
)
from benchgate.analysis.transfer import LevelPoint, LevelSweep, clip_level, thd_at_level


def _points(freqs, gains_db, u=0.01):
    return tuple(ResponsePoint(float(f), Measurement("gain_db", float(g), "dB", u)) for f, g in zip(freqs, gains_db,
                                                                                                      strict=True))


def _decades(lo, hi, per_decade):
    n = int(round(math.log10(hi / lo) * per_decade)) + 1
    return np.logspace(math.log10(lo), math.log10(hi), n)


class TestCutoff:
    def test_rc_low_pass_against_formula_and_freqs(self):
        # first-order RC: f_c = 1/(2πRC) (handbook formula, from memory); the gains come from
        # scipy.signal.freqs of the same circuit (scipy.signal reference)
        r, c = 6.8e3, 10e-9
        fc = 1 / (2 * math.pi * r * c)
        freqs = _decades(100, 100e3, 12)
        _, h = signal.freqs([1.0], [r * c, 1.0], worN=2 * np.pi * freqs)
        sweep = FrequencySweep(_points(freqs, 20 * np.log10(np.abs(h))))
        m = f_3db_high(sweep)
        assert m.valid
        assert abs(m.value - fc) <= m.uncertainty
        assert m.uncertainty < 0.02 * fc  # twelve points per decade: within 2 %
        assert not f_3db_low(sweep).valid  # the response is flat down to the lowest point

    def test_sallen_key_band_edges(self):
        # a band-pass made of a first-order high-pass at 50 Hz and a Butterworth low-pass at 8 kHz:
        # each −3 dB point against its analytic value (scipy.signal.butter/freqs reference)
        freqs = _decades(5, 200e3, 20)
        w = 2 * np.pi * freqs
        _, hh = signal.freqs([1.0 / (2 * np.pi * 50), 0.0], [1.0 / (2 * np.pi * 50), 1.0], worN=w)
        b, a = signal.butter(2, 2 * np.pi * 8000, analog=True)
        _, hl = signal.freqs(b, a, worN=w)
        sweep = FrequencySweep(_points(freqs, 20 * np.log10(np.abs(hh * hl))))
        lo, hi = f_3db_low(sweep), f_3db_high(sweep)
        # the two sections interact a little (−3 dB of the product, not of each): compare with the
        # crossing of the exact product found by root finding on freqs
        def level(f):
            _, x = signal.freqs([1 / (2 * np.pi * 50), 0.0], [1 / (2 * np.pi * 50), 1.0], worN=[2 * np.pi * f])
            _, y = signal.freqs(b, a, worN=[2 * np.pi * f])
            return 20 * np.log10(abs(x[0] * y[0]))
        ref = max(20 * np.log10(np.abs(hh * hl)))
        exact_lo = _bisect(lambda f: level(f) - (ref + HALF_POWER_DB), 10, 500)
        exact_hi = _bisect(lambda f: level(f) - (ref + HALF_POWER_DB), 1000, 50e3)
        assert abs(lo.value - exact_lo) <= lo.uncertainty
        assert abs(hi.value - exact_hi) <= hi.uncertainty

    def test_reference_frequency_and_missing_crossing(self):
        freqs = [100, 1000, 2000, 4000]
        sweep = FrequencySweep(_points(freqs, [0.0, 0.0, -1.0, -2.0]), reference_frequency=1000)
        m = f_3db_high(sweep)
        assert not m.valid and "above the highest" in m.reason
        bad = FrequencySweep(_points(freqs, [0.0, 0.0, -1.0, -2.0]), reference_frequency=1500)
        assert "no sweep point at the reference" in f_3db_high(bad).reason

    def test_invalid_point_on_the_way_refuses(self):
        pts = list(_points([100, 1000, 2000, 4000], [0.0, -1.0, -2.0, -6.0]))
        pts[2] = ResponsePoint(2000, Measurement.invalid("gain_db", "dB", "clipped"))
        assert "not valid" in f_3db_high(FrequencySweep(tuple(pts))).reason

    def test_exact_on_a_straight_line(self):
        # linear in log f: the interpolation is exact (known answer by construction)
        freqs = [1000, 2000, 4000]
        gains = [0.0, -2.0, -4.0]  # −2 dB per octave
        m = f_3db_high(FrequencySweep(_points(freqs, gains)))
        expect = 2000 * 2 ** ((-HALF_POWER_DB - 2.0) / 2.0)
        assert m.value == pytest.approx(expect, rel=1e-12)


class TestRipple:
    def test_ripple_of_a_chebyshev_filter(self):
        # a 1 dB Chebyshev type I low-pass ripples by exactly 1 dB in its pass band
        # (scipy.signal.cheby1 reference); dense points catch its peaks and troughs
        b, a = signal.cheby1(4, 1.0, 2 * np.pi * 1000, analog=True)
        freqs = np.linspace(1, 1000, 4000)
        _, h = signal.freqs(b, a, worN=2 * np.pi * freqs)
        sweep = FrequencySweep(_points(freqs, 20 * np.log10(np.abs(h)), u=0.005), passband=(1, 1000))
        m = ripple(sweep)
        assert m.value == pytest.approx(1.0, abs=1e-3)
        assert m.uncertainty == pytest.approx(2 ** 0.5 * 0.005)

    def test_passband_gain(self):
        sweep = FrequencySweep(_points([10, 100, 1000], [19.0, 20.0, 17.0]))
        assert passband_gain_db(sweep).value == 20.0
        assert "fewer than two" in ripple(FrequencySweep(_points([10, 100], [1, 2]), passband=(50, 60))).reason


def _bisect(fn, lo, hi):
    flo = fn(lo)
    for _ in range(80):
        mid = math.sqrt(lo * hi)
        fm = fn(mid)
        if (fm > 0) == (flo > 0):
            lo, flo = mid, fm
        else:
            hi = mid
    return math.sqrt(lo * hi)


def _level_point(vin, vout, thd_pct, u_thd=None):
    return LevelPoint(Measurement("input_amplitude", vin, "V", 1e-4),
                      Measurement("output_amplitude", vout, "V", 1e-4),
                      Measurement("output_thd", thd_pct, "%", u_thd if u_thd is not None else 0.01 * thd_pct))


class TestLevelSweep:
    def test_clip_level_exact_on_exponential_thd(self):
        # THD = 0.01 %·10^(vin/1 V): log-linear, so the interpolation is exact (known answer by
        # construction): 1 % is reached at 2 V
        pts = [_level_point(v, 10 * v, 0.01 * 10 ** v) for v in (0.5, 1.0, 1.5, 1.75, 2.5, 3.0)]
        m = clip_level(LevelSweep(tuple(pts), thd_limit=1.0))
        assert m.value == pytest.approx(2.0, rel=1e-12)
        assert m.uncertainty > 0

    def test_clip_level_refusals(self):
        pts = [_level_point(v, 10 * v, 0.01) for v in (0.5, 1.0)]
        assert "stays below" in clip_level(LevelSweep(tuple(pts), thd_limit=1.0)).reason
        pts = [_level_point(v, 10 * v, 5.0) for v in (0.5, 1.0)]
        assert "already" in clip_level(LevelSweep(tuple(pts), thd_limit=1.0)).reason
        assert "no THD limit" in clip_level(LevelSweep(tuple(pts))).reason

    def test_thd_at_level(self):
        # THD log-linear in output amplitude between two points: exact at the midpoint's geometric mean
        pts = [_level_point(0.1, 1.0, 0.01), _level_point(0.2, 2.0, 0.1)]
        m = thd_at_level(LevelSweep(tuple(pts), output_level=1.5))
        assert m.value == pytest.approx(10 ** -1.5, rel=1e-12)
        assert "not reached" in thd_at_level(LevelSweep(tuple(pts), output_level=3.0)).reason
