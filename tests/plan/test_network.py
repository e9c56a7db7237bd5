"""Oscillator circuits against handbook formulas and an independent nodal analysis."""

from __future__ import annotations

import math

import numpy as np
import pytest
from numpy.testing import assert_allclose
from scipy.optimize import brentq

from benchgate.plan.network import colpitts, hartley, rc_ladder, timer_astable, wien_bridge


def _nodal_transfer(w: float, R, C, form: str, source: float, load: float) -> complex:
    """Vout/Vemf of the ladder by nodal analysis (independent of the ABCD code).

    Nodes 0..N: node 0 is the ladder input (behind the source resistance), node i the output
    of section i. Series element of section i joins node i-1 and node i; its shunt element
    goes from node i to ground. The source is a Norton equivalent at node 0.
    """
    n = len(R)
    ys = [(1j * w * C[i]) if form == "highpass" else 1.0 / R[i] for i in range(n)]
    yp = [1.0 / R[i] if form == "highpass" else 1j * w * C[i] for i in range(n)]
    size = n + 1
    Y = np.zeros((size, size), complex)
    inj = np.zeros(size, complex)
    for i in range(n):
        a, b = i, i + 1
        Y[a, a] += ys[i]
        Y[b, b] += ys[i]
        Y[a, b] -= ys[i]
        Y[b, a] -= ys[i]
        Y[b, b] += yp[i]
    if math.isfinite(load):
        Y[n, n] += 1.0 / load
    if source > 0:
        Y[0, 0] += 1.0 / source
        inj[0] = 1.0 / source  # 1 V emf behind the source resistance
        v = np.linalg.solve(Y, inj)
        return v[n]
    # ideal source: node 0 held at 1 V, solve the rest
    rhs = -Y[1:, 0] * 1.0
    v = np.linalg.solve(Y[1:, 1:], rhs)
    return v[-1]


def _nodal_180(R, C, form, source=0.0, load=math.inf):
    """scipy brentq on Im(H) of the nodal transfer, bracketed where the phase passes 180°."""
    tau = float(np.exp(np.mean(np.log(np.asarray(R) * np.asarray(C)))))
    ws = np.logspace(-3, 3, 300) / tau
    h = np.array([_nodal_transfer(w, R, C, form, source, load) for w in ws])
    if form == "highpass":
        ws, h = ws[::-1], h[::-1]
    phase = np.abs(np.unwrap(np.angle(h)))
    k = int(np.argmax(phase >= math.pi))
    w = brentq(lambda x: _nodal_transfer(x, R, C, form, source, load).imag, ws[k - 1], ws[k],
               xtol=1e-14, rtol=1e-14)
    hw = _nodal_transfer(w, R, C, form, source, load)
    return w / (2 * math.pi), 1.0 / abs(hw), hw


class TestRcLadder:
    def test_highpass_equal_sections(self):
        # handbook formula (docs/references.md): f = 1/(2πRC√6), attenuation 1/29; 10k/10n -> 649.747 Hz
        out = rc_ladder(np.full((1, 3), 10e3), np.full((1, 3), 10e-9), form="highpass")
        assert_allclose(out["frequency"], 1 / (2 * math.pi * 10e3 * 10e-9 * math.sqrt(6)), rtol=1e-12)
        assert_allclose(out["frequency"], 649.747, atol=5e-4)
        assert_allclose(out["gain_needed"], 29.0, rtol=1e-12)

    def test_lowpass_equal_sections(self):
        # handbook formula (docs/references.md): f = √6/(2πRC), attenuation 1/29; 10k/10n -> 3898.48 Hz
        out = rc_ladder(np.full((1, 3), 10e3), np.full((1, 3), 10e-9), form="lowpass")
        assert_allclose(out["frequency"], math.sqrt(6) / (2 * math.pi * 10e3 * 10e-9), rtol=1e-12)
        assert_allclose(out["frequency"], 3898.48, atol=5e-3)
        assert_allclose(out["gain_needed"], 29.0, rtol=1e-12)

    @pytest.mark.parametrize("form", ["highpass", "lowpass"])
    @pytest.mark.parametrize(("source", "load"), [(0.0, 10e3), (0.0, 47e3), (2.2e3, math.inf), (1e3, 22e3)])
    def test_source_and_load_match_nodal_analysis(self, form, source, load):
        # independent reference: nodal analysis in this test + scipy.optimize.brentq
        R, C = [10e3, 10e3, 10e3], [10e-9, 10e-9, 10e-9]
        f_ref, g_ref, h = _nodal_180(R, C, form, source, load)
        assert h.real < 0  # really the inverting point
        out = rc_ladder(np.array([R]), np.array([C]), form=form, source=np.array([source]),
                        load=np.array([load]))
        assert_allclose(out["frequency"], f_ref, rtol=1e-9)
        assert_allclose(out["gain_needed"], g_ref, rtol=1e-9)

    def test_load_moves_the_way_theory_says(self):
        # circuit theory: a load across the last shunt R of a high-pass ladder lowers that R,
        # so the 180° point moves up and the ladder attenuates more (needs more gain);
        # a heavier load moves it further. For the low-pass ladder a load also costs gain.
        R, C = np.full((1, 3), 10e3), np.full((1, 3), 10e-9)
        base = rc_ladder(R, C)
        light = rc_ladder(R, C, load=np.array([100e3]))
        heavy = rc_ladder(R, C, load=np.array([10e3]))
        assert base["frequency"][0] < light["frequency"][0] < heavy["frequency"][0]
        assert 29.0 < light["gain_needed"][0] < heavy["gain_needed"][0]
        lp = rc_ladder(R, C, form="lowpass", load=np.array([10e3]))
        assert lp["gain_needed"][0] > 29.0
        # an ideal source and open output reduce to the textbook case exactly
        same = rc_ladder(R, C, source=np.array([0.0]), load=np.array([math.inf]))
        assert_allclose(same["frequency"], base["frequency"], rtol=1e-14)

    @pytest.mark.parametrize("n", [4, 5, 6])
    def test_more_sections_match_nodal_analysis(self, n):
        # independent nodal reference for N > 3 (no textbook shortcut here)
        R = list(np.linspace(8e3, 12e3, n))
        C = list(np.linspace(12e-9, 8e-9, n))
        f_ref, g_ref, _ = _nodal_180(R, C, "highpass")
        out = rc_ladder(np.array([R]), np.array([C]))
        assert_allclose(out["frequency"], f_ref, rtol=1e-9)
        assert_allclose(out["gain_needed"], g_ref, rtol=1e-9)

    def test_per_section_values_vectorised(self):
        rng = np.random.default_rng(7)
        R = rng.uniform(5e3, 15e3, (5, 3))
        C = rng.uniform(5e-9, 15e-9, (5, 3))
        out = rc_ladder(R, C, form="lowpass")
        for i in range(5):
            f_ref, g_ref, _ = _nodal_180(list(R[i]), list(C[i]), "lowpass")
            assert_allclose(out["frequency"][i], f_ref, rtol=1e-9)
            assert_allclose(out["gain_needed"][i], g_ref, rtol=1e-9)

    def test_needs_three_sections(self):
        with pytest.raises(ValueError):
            rc_ladder(np.full((1, 2), 1e3), np.full((1, 2), 1e-9))


class TestWien:
    def test_equal_parts(self):
        # handbook formula (docs/references.md): f = 1/(2πRC), feedback 1/3 -> gain 3; 16k/10n -> 994.7 Hz
        out = wien_bridge(16e3, 16e3, 10e-9, 10e-9)
        assert_allclose(out["frequency"], 1 / (2 * math.pi * 16e3 * 10e-9), rtol=1e-12)
        assert_allclose(out["frequency"], 994.718, atol=1e-3)
        assert_allclose(out["gain_needed"], 3.0, rtol=1e-12)

    def test_general(self):
        # handbook formula (docs/references.md): f = 1/(2π√(R1R2C1C2)); gain 1 + R1/R2 + C2/C1
        # (derived from the series/parallel network at its zero-phase frequency)
        R1, R2, C1, C2 = np.array([10e3, 33e3]), np.array([22e3, 4.7e3]), np.array([4.7e-9, 1e-9]), np.array([15e-9, 2.2e-9])
        out = wien_bridge(R1, R2, C1, C2)
        assert_allclose(out["frequency"], 1 / (2 * np.pi * np.sqrt(R1 * R2 * C1 * C2)), rtol=1e-12)
        assert_allclose(out["gain_needed"], 1 + R1 / R2 + C2 / C1, rtol=1e-12)


class TestTimer:
    def test_reference_values(self):
        # docs/references.md check: R1 = 1k, R2 = 10k, C = 10n -> 6870 Hz, duty 52.38 %
        out = timer_astable(1e3, 10e3, 10e-9)
        assert_allclose(out["frequency"], 6870, atol=0.5)
        assert_allclose(out["duty"] * 100, 52.38, atol=0.005)

    def test_formula(self):
        # handbook formula (docs/references.md): f = 1/(ln2·(R1+2R2)·C), duty = (R1+R2)/(R1+2R2)
        R1, R2, C = 1e3, 6.8e3, 100e-9
        out = timer_astable(R1, R2, C)
        assert_allclose(out["frequency"], 1 / (math.log(2) * (R1 + 2 * R2) * C), rtol=1e-12)
        assert_allclose(out["duty"], (R1 + R2) / (R1 + 2 * R2), rtol=1e-12)
        assert_allclose(out["frequency"], 988.15, atol=0.01)  # PF-2 design (interfaces: ≈ 988 Hz)

    def test_bad_thresholds(self):
        with pytest.raises(ValueError):
            timer_astable(1e3, 1e3, 1e-9, lower=0.7, upper=0.6)


class TestLcTank:
    def test_colpitts(self):
        # handbook formula (docs/references.md): f = 1/(2π√(L·C1C2/(C1+C2)))
        L, C1, C2 = 1e-3, np.array([1e-9, 1e-9]), np.array([1e-9, 3.3e-9])
        out = colpitts(L, C1, C2)
        assert_allclose(out["frequency"], 1 / (2 * np.pi * np.sqrt(L * C1 * C2 / (C1 + C2))), rtol=1e-12)
        assert_allclose(out["gain_needed"], C2 / C1)

    def test_hartley(self):
        # handbook formula (docs/references.md, from memory): f = 1/(2π√((L1+L2+2M)·C))
        L1, L2, M, C = 1e-3, 2e-3, np.array([0.0, 0.3e-3]), 1e-9
        out = hartley(L1, L2, C, M)
        assert_allclose(out["frequency"], 1 / (2 * np.pi * np.sqrt((L1 + L2 + 2 * M) * C)), rtol=1e-12)
        assert_allclose(out["gain_needed"], (L1 + M) / (L2 + M))
