"""Uncertainty helpers: Cramér–Rao expressions, clock and resolution terms, k = 2."""

from __future__ import annotations

import math

import pytest
from numpy.testing import assert_allclose

from benchgate.analysis import AdcInfo
from benchgate.analysis.uncertainty import (
    K_COVERAGE,
    clock_std,
    crlb_amplitude_std,
    crlb_frequency_std,
    expand,
    quantisation_std,
)


class TestCrlb:
    def test_frequency_formula(self):
        # Rife & Boorstyn (1974), Kay (1993): var(f) = 12 / ((2π)² η N (N² − 1))
        eta, n = 100.0, 1000
        expected = math.sqrt(12 / ((2 * math.pi) ** 2 * eta * n * (n * n - 1)))
        assert_allclose(crlb_frequency_std(eta, n), expected, rtol=1e-15)
        # scaling: σ_f ∝ N^(−3/2) and ∝ η^(−1/2) (same source)
        assert_allclose(crlb_frequency_std(eta, 4000) / crlb_frequency_std(eta, 1000), 4 ** -1.5, rtol=1e-5)
        assert_allclose(crlb_frequency_std(4 * eta, n) / crlb_frequency_std(eta, n), 0.5, rtol=1e-12)

    def test_frequency_limits(self):
        assert crlb_frequency_std(0.0, 100) == math.inf
        assert crlb_frequency_std(math.inf, 100) == 0.0
        assert crlb_frequency_std(10.0, 1) == math.inf

    def test_amplitude_formula(self):
        # Rife & Boorstyn (1974): var(Â) = 2σ²/N
        assert_allclose(crlb_amplitude_std(0.01, 200), math.sqrt(2 * 0.01 / 200), rtol=1e-15)


class TestBudget:
    def test_expand(self):
        # JCGM 100:2008: U = k·√(Σu²), k = 2
        assert K_COVERAGE == 2.0
        assert_allclose(expand(3.0, 4.0), 10.0)
        assert expand() == 0.0

    def test_clock(self):
        # GUM: rectangular bound a → u = a/√3
        assert_allclose(clock_std(1000.0, 50.0), 1000.0 * 50e-6 / math.sqrt(3))
        assert clock_std(1000.0, None) == 0.0

    @pytest.mark.parametrize("bits, vref", [(12, 3.3), (8, 5.0)])
    def test_resolution(self, bits, vref):
        # GUM F.2.2.1: resolution δ → u = δ/√12
        assert_allclose(quantisation_std(AdcInfo(bits, vref)), vref / 2 ** bits / math.sqrt(12))
        assert quantisation_std(None) == 0.0
