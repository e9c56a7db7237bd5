"""Gain stages and filters: outputs against handbook formulas, nodal analysis and scipy.signal.freqs;
worst-case and Monte Carlo windows derived from their tolerances."""

from __future__ import annotations

import itertools
import math

import numpy as np
import pytest
from scipy import signal

from benchgate.plan import derive, stages
from benchgate.units.tolerance import Part, Tolerance


def _nodal_sallen_key(form, R1, R2, C1, C2, w):
    """|H| and arg H of a unity-gain Sallen–Key stage by nodal analysis at each ω (numpy solve),
    independent of the closed form under test."""
    out = []
    for wk in np.atleast_1d(w):
        s = 1j * wk
        if form == "lowpass":
            z_in, z_mid, y_fb, y_gnd = R1, R2, s * C1, s * C2  # series R1, R2; C1 to output; C2 to ground
        else:
            z_in, z_mid, y_fb, y_gnd = 1 / (s * C1), 1 / (s * C2), 1 / R1, 1 / R2
        # unknowns VA (junction) and VB (= output); Vin = 1
        m = np.array([[1 / z_in + 1 / z_mid + y_fb, -1 / z_mid - y_fb],
                      [-1 / z_mid, 1 / z_mid + y_gnd]], dtype=complex)
        rhs = np.array([1 / z_in, 0], dtype=complex)
        out.append(np.linalg.solve(m, rhs)[1])
    return np.array(out)


class TestGainStage:
    def test_handbook_gains(self):
        # op-amp gain: non-inverting 1 + Rf/Rg; inverting −Rf/Rin (handbook formula, from memory)
        out = stages.gain_stage(np.array([47e3]), np.array([4.7e3]), kind="noninverting")
        assert out["gain"][0] == pytest.approx(11.0)
        assert out["gain_db"][0] == pytest.approx(20 * math.log10(11.0))
        assert stages.gain_stage(np.array([100e3]), np.array([10e3]), kind="inverting")["gain"][0] == pytest.approx(10)

    def test_worst_case_window(self):
        # extremes of 1 + Rf/Rg: Rf high with Rg low and the reverse (handbook formula, from memory)
        c = derive.Circuit("gain_stage", {"type": "noninverting"},
                           {"Rf": Part(47e3, Tolerance(0.01, 0.01, True), "Ω"),
                            "Rg": Part(4.7e3, Tolerance(0.01, 0.01, True), "Ω")})
        d = derive.analyze(c, "gain", unit="V/V")
        assert d.low == pytest.approx(1 + 47e3 * 0.99 / (4.7e3 * 1.01))
        assert d.high == pytest.approx(1 + 47e3 * 1.01 / (4.7e3 * 0.99))
        assert d.low <= d.monte_carlo["min"] and d.monte_carlo["max"] <= d.high
        assert not d.widened_by_mc


class TestRcFilter:
    def test_corner_against_formula_and_freqs(self):
        # first-order RC: f_c = 1/(2πRC) (handbook formula, from memory); |H| = 1/√2 there by
        # scipy.signal.freqs of the same circuit (scipy.signal reference)
        r, c = 6.8e3, 10e-9
        fc = stages.rc_filter(np.array([r]), np.array([c]), form="lowpass")["f_3db_high"][0]
        assert fc == pytest.approx(1 / (2 * math.pi * r * c))
        _, h = signal.freqs([1.0], [r * c, 1.0], worN=[2 * math.pi * fc])
        assert abs(h[0]) == pytest.approx(math.sqrt(0.5), rel=1e-12)
        fh = stages.rc_filter(np.array([r]), np.array([c]), form="highpass")["f_3db_low"][0]
        _, h = signal.freqs([r * c, 0.0], [r * c, 1.0], worN=[2 * math.pi * fh])
        assert abs(h[0]) == pytest.approx(math.sqrt(0.5), rel=1e-12)

    def test_form_gives_only_its_own_cutoff(self):
        c = derive.Circuit("rc_filter", {"form": "lowpass"},
                           {"R": Part(10e3, Tolerance(0.05, 0.05, True), "Ω"),
                            "C": Part(10e-9, Tolerance(0.1, 0.1, True), "F")})
        with pytest.raises(ValueError, match="gives f_3db_high, not f_3db_low"):
            derive.analyze(c, "f_3db_low")
        d = derive.analyze(c, "f_3db_high")
        assert d.low == pytest.approx(1 / (2 * math.pi * 10.5e3 * 11e-9))
        assert d.high == pytest.approx(1 / (2 * math.pi * 9.5e3 * 9e-9))


class TestSallenKey:
    def test_f0_and_q_against_handbook(self):
        # Sallen–Key unity-gain low-pass: ω0 = 1/√(R1R2C1C2), Q = √(R1R2C1C2)/(C2(R1+R2)) with C2
        # the capacitor to ground; equal components give Q = 0.5 (handbook formula, from memory)
        R1, R2, C1, C2 = 10e3, 22e3, 22e-9, 4.7e-9
        out = stages.sallen_key(*(np.array([v]) for v in (R1, R2, C1, C2)), form="lowpass")
        assert out["f0"][0] == pytest.approx(1 / (2 * math.pi * math.sqrt(R1 * R2 * C1 * C2)))
        assert out["q"][0] == pytest.approx(math.sqrt(R1 * R2 * C1 * C2) / (C2 * (R1 + R2)))
        eq = stages.sallen_key(*(np.array([v]) for v in (10e3, 10e3, 10e-9, 10e-9)))
        assert eq["q"][0] == pytest.approx(0.5)
        # equal components, Q = 0.5: |H|² = 1/2 at (ω/ω0)² = √2 − 1 (derived from the quadratic)
        assert eq["f_3db_high"][0] == pytest.approx(eq["f0"][0] * math.sqrt(math.sqrt(2) - 1))

    def test_butterworth_corner_is_f0(self):
        # Q = 1/√2 (Butterworth) puts the −3 dB point at f0 (handbook, from memory): C1 = 2·C2, equal R
        out = stages.sallen_key(*(np.array([v]) for v in (10e3, 10e3, 20e-9, 10e-9)))
        assert out["q"][0] == pytest.approx(1 / math.sqrt(2))
        assert out["f_3db_high"][0] == pytest.approx(out["f0"][0], rel=1e-12)

    @pytest.mark.parametrize("form", ["lowpass", "highpass"])
    def test_against_nodal_analysis_and_freqs(self, form):
        # the closed-form denominator against a nodal solution of the circuit, and the −3 dB
        # frequency against scipy.signal.freqs of that denominator (scipy.signal reference)
        R1, R2, C1, C2 = 12e3, 33e3, 15e-9, 6.8e-9
        a2, a1 = stages.sallen_key_denominator(R1, R2, C1, C2, form=form)
        num = [1.0] if form == "lowpass" else [float(a2), 0.0, 0.0]
        w = 2 * math.pi * np.logspace(1, 5, 41)
        _, h = signal.freqs(num, [float(a2), float(a1), 1.0], worN=w)
        np.testing.assert_allclose(h, _nodal_sallen_key(form, R1, R2, C1, C2, w), rtol=1e-10)
        key = "f_3db_high" if form == "lowpass" else "f_3db_low"
        f3 = stages.sallen_key(*(np.array([v]) for v in (R1, R2, C1, C2)), form=form)[key][0]
        _, h3 = signal.freqs(num, [float(a2), float(a1), 1.0], worN=[2 * math.pi * f3])
        assert abs(h3[0]) == pytest.approx(math.sqrt(0.5), rel=1e-10)

    def test_worst_case_is_the_extreme_over_a_dense_grid(self):
        # corners give the extremes (the monotonic case, C2(R1+R2) > R2·C1): compare with a 5⁴ grid
        nominal = {"R1": 10e3, "R2": 10e3, "C1": 22e-9, "C2": 10e-9}
        tol = {"R1": 0.01, "R2": 0.01, "C1": 0.05, "C2": 0.05}
        c = derive.Circuit("sallen_key", {"form": "lowpass"},
                           {k: Part(v, Tolerance(tol[k], tol[k], True), "Ω" if k[0] == "R" else "F")
                            for k, v in nominal.items()})
        d = derive.analyze(c, "f_3db_high", seed=3)
        grid = [np.linspace(v * (1 - tol[k]), v * (1 + tol[k]), 5) for k, v in nominal.items()]
        vals = np.array(list(itertools.product(*grid)))
        f3 = stages.sallen_key(vals[:, 0], vals[:, 1], vals[:, 2], vals[:, 3])["f_3db_high"]
        assert d.low == pytest.approx(f3.min(), rel=1e-12)
        assert d.high == pytest.approx(f3.max(), rel=1e-12)
        assert d.low < d.monte_carlo["p0_135"] < d.nominal < d.monte_carlo["p99_865"] < d.high
        assert not d.widened_by_mc
