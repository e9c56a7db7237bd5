"""The four-parameter fit's closed-form sums (Dirichlet-kernel derivatives) against direct sums,
and the fit itself against scipy's general least squares."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.optimize import least_squares

from benchgate.analysis.sinefit import _dirichlet_derivatives, fit4


@pytest.mark.parametrize("n", [5, 6, 17, 128, 1001, 65536])
def test_dirichlet_derivatives_match_direct_sums(n):
    t = np.arange(n) - (n - 1) / 2.0
    # the fit asks for x = ω and 2ω with ω below 0.45 of the sample rate, so x < 1.8π
    for x in np.random.default_rng(n).uniform(1e-3, 1.8 * math.pi, 25):
        s1, c2 = _dirichlet_derivatives(float(x), n)
        # direct summation (numpy reference): Σ t·sin(x t) and Σ t²·cos(x t)
        assert s1 == pytest.approx(np.sum(t * np.sin(x * t)), abs=1e-11 * np.sum(np.abs(t)))
        assert c2 == pytest.approx(np.sum(t * t * np.cos(x * t)), abs=1e-11 * np.sum(t * t))


def test_fit4_matches_scipy_least_squares():
    rng = np.random.default_rng(1057)
    for _ in range(5):
        n = int(rng.integers(200, 5000))
        w = 2 * math.pi * rng.uniform(5, 40) / n
        y = 0.8 * np.cos(w * np.arange(n) + 1.0) + 0.2 + rng.normal(0, 0.05, n)
        fit = fit4(y, w * (1 + 1e-3 / n))
        k = np.arange(n)

        def resid(p, k=k, y=y):
            return p[0] * np.cos(p[3] * k) + p[1] * np.sin(p[3] * k) + p[2] - y

        # scipy.optimize.least_squares reference, started from the truth
        ref = least_squares(resid, [0.8 * math.cos(1.0), -0.8 * math.sin(1.0), 0.2, w],
                            xtol=1e-15, ftol=1e-15, gtol=1e-15)
        # the fit stops once its step is below 1 % of its own standard deviation, so it agrees
        # with the exact optimum to a few % of the Cramér–Rao σ (Händel 2000: var ω =
        # 24σ²/(A² N (N²−1)); var A = 2σ²/N; var C = σ²/N)
        sig2 = 0.05 ** 2
        assert fit.converged
        assert abs(fit.omega - ref.x[3]) <= 0.05 * math.sqrt(24 * sig2 / (0.64 * n * (n * n - 1)))
        assert abs(fit.amplitude - math.hypot(ref.x[0], ref.x[1])) <= 0.05 * math.sqrt(2 * sig2 / n)
        assert abs(fit.offset - ref.x[2]) <= 0.05 * math.sqrt(sig2 / n)
