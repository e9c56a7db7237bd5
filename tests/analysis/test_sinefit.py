"""IEEE 1057 three- and four-parameter sine fits on known answers."""

from __future__ import annotations

import math

import numpy as np
from numpy.testing import assert_allclose

from benchgate.analysis.sinefit import Workspace, best_start, fit3, fit4, phasor


class TestWorkspace:
    def test_block_product_matches_cos_sin(self):
        # numpy cos/sin as the reference
        n, w = 10_007, 0.123456
        t = np.arange(n) - (n - 1) / 2
        z = phasor(w, n)
        assert_allclose(z.real, np.cos(w * t), atol=1e-12)
        assert_allclose(z.imag, np.sin(w * t), atol=1e-12)
        ws = Workspace(5)
        ws.set(1.0)
        assert ws.c.shape == (5,)


class TestFit3:
    def test_recovers_parameters(self):
        # IEEE Std 1057: exact recovery of a noiseless sine at the known frequency
        n, w = 500, 2 * math.pi * 0.0371
        k = np.arange(n)
        y = 0.25 + 1.5 * np.cos(w * k + 0.7)
        fit = fit3(y, w)
        assert_allclose(fit.amplitude, 1.5, rtol=1e-10)
        assert_allclose(fit.offset, 0.25, atol=1e-10)
        assert_allclose(fit.phase, 0.7, atol=1e-10)
        assert fit.residual_var < 1e-20


class TestFit4:
    def test_converges_from_a_fraction_of_a_bin(self):
        # IEEE Std 1057 four-parameter fit: noiseless data, start 0.2 bin off
        n, f = 2000, 0.01234
        k = np.arange(n)
        y = -0.1 + 0.8 * np.cos(2 * math.pi * f * k - 1.1)
        fit = fit4(y, 2 * math.pi * (f + 0.2 / n))
        assert fit.converged
        assert_allclose(fit.cycles_per_sample, f, rtol=1e-10)
        assert_allclose(fit.amplitude, 0.8, rtol=1e-9)
        assert_allclose(fit.phase, -1.1, atol=1e-7)

    def test_short_record_with_grid_start(self):
        # 2.5 cycles: the DFT peak is biased by the negative-frequency image; the grid fixes it
        n, f = 100, 0.025
        y = np.cos(2 * math.pi * f * np.arange(n) + 0.4)
        w0 = best_start(y, 2 * math.pi * (f + 0.6 / n))
        fit = fit4(y, w0)
        assert_allclose(fit.cycles_per_sample, f, rtol=1e-8)

    def test_iteration_cap(self):
        rng = np.random.default_rng(0)
        fit = fit4(rng.normal(size=64), 0.5, max_iter=1)
        assert fit.iterations == 1


class TestClosedFormSums:
    def test_match_direct_sums(self):
        # Dirichlet-kernel closed forms (derived) against direct summation with numpy
        rng = np.random.default_rng(0)
        for n in (16, 17, 1000, 100_003):
            for omega in rng.uniform(0.001, 3.1, 5):
                ws = Workspace(n)
                ws.set(float(omega))
                cc, ss, cs, sc, s_sum = ws.sums()
                t = np.arange(n) - (n - 1) / 2
                c, s = np.cos(omega * t), np.sin(omega * t)
                assert_allclose([cc, ss, sc], [c @ c, s @ s, c.sum()], rtol=1e-9, atol=1e-7)
                assert_allclose([cs, s_sum], [c @ s, s.sum()], atol=1e-7)
