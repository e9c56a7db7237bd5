"""Worst-case windows over tolerance corners and the Monte Carlo spread and yield."""

from __future__ import annotations

import itertools
import math

import numpy as np
import pytest
from numpy.testing import assert_allclose

from benchgate.plan import derive
from benchgate.units import parse_part, parse_tolerance


def _ladder(r="6k8 ±5%", c="10n ±10%", n=3, form="highpass", **extra):
    parts = {f"R{i + 1}": parse_part(r, "Ω") for i in range(n)}
    parts |= {f"C{i + 1}": parse_part(c, "F") for i in range(n)}
    parts |= {k: parse_part(v, "Ω") for k, v in extra.items()}
    return derive.Circuit("rc_ladder", {"form": form, "sections": n}, parts)


def _timer(r1="1k ±5%", r2="6k8 ±5%", c="100n ±10%"):
    return derive.Circuit("timer_astable", {}, {"R1": parse_part(r1, "Ω"), "R2": parse_part(r2, "Ω"),
                                                "C": parse_part(c, "F")})


def _wien():
    return derive.Circuit("wien_bridge", {}, {"R1": parse_part("16k 1%", "Ω"), "R2": parse_part("16k 1%", "Ω"),
                                              "C1": parse_part("10n 5%", "F"), "C2": parse_part("10n 5%", "F")})


class TestCorners:
    def test_counts_every_physical_part(self):
        # a shared R and C still means 3 + 3 independent parts: 2^6 corners
        d = derive.analyze(_ladder(), "frequency", draws=10_000)
        assert d.corners == 64
        assert derive.analyze(_timer(), "frequency", draws=10_000).corners == 8

    def test_equal_ladder_extremes(self):
        # f ∝ 1/(RC) for a uniformly scaled ladder (handbook formula): extremes at all-low/all-high
        d = derive.analyze(_ladder(), "frequency", draws=10_000)
        f0 = 1 / (2 * math.pi * 6800 * 10e-9 * math.sqrt(6))
        assert_allclose(d.nominal, f0, rtol=1e-12)
        assert_allclose(d.low, f0 / (1.05 * 1.10), rtol=1e-12)
        assert_allclose(d.high, f0 / (0.95 * 0.90), rtol=1e-12)
        assert set(d.low_corner.values()) == {"+"} and set(d.high_corner.values()) == {"-"}
        assert_allclose(d.gain_nominal, 29.0, rtol=1e-12)

    def test_corners_match_a_loop_over_products(self):
        # brute force in the test: itertools.product over every corner, one evaluation each
        circ = _timer()
        names = list(circ.parts)
        vals = []
        for combo in itertools.product((0, 1), repeat=len(names)):
            v = {n: np.array([circ.parts[n].high if b else circ.parts[n].low]) for n, b in zip(names, combo, strict=True)}
            vals.append(float(derive.evaluate(circ, v)["duty"][0]) * 100)
        d = derive.analyze(circ, "duty_cycle", draws=10_000, unit="%")
        assert_allclose([d.low, d.high], [min(vals), max(vals)], rtol=1e-12)
        # the timer's duty rises with R1 and falls with R2 (formula (R1+R2)/(R1+2R2))
        assert d.high_corner["R1"] == "+" and d.high_corner["R2"] == "-"

    @pytest.mark.parametrize("make,measurement", [(_ladder, "frequency"), (_timer, "frequency"),
                                                  (_timer, "duty_cycle"), (_wien, "frequency"),
                                                  (lambda: _ladder(form="lowpass", source="1k ±5%", load="22k ±5%"), "frequency")])
    def test_worst_case_contains_every_draw(self, make, measurement):
        circ = make()
        d = derive.analyze(circ, measurement, draws=20_000, seed=11, distribution="uniform")
        assert not d.widened_by_mc
        draws = derive.draw(circ, 20_000, 11, "uniform")
        y = derive.evaluate(circ, draws)[derive.TOPOLOGIES[circ.topology]["outputs"][measurement]]
        y = y * derive.output_scale(measurement)
        assert np.all(y >= d.low - 1e-9 * abs(d.low)) and np.all(y <= d.high + 1e-9 * abs(d.high))
        assert d.monte_carlo["min"] >= d.low and d.monte_carlo["max"] <= d.high

    def test_too_many_parts(self):
        with pytest.raises(ValueError, match="corner enumeration"):
            derive.analyze(_ladder(n=8, source="1k 1%", load="10k 1%"), "frequency", draws=10_000)

    def test_wrong_output(self):
        with pytest.raises(ValueError, match="not duty_cycle"):
            derive.analyze(_ladder(), "duty_cycle", draws=10_000)

    def test_too_few_draws(self):
        with pytest.raises(ValueError, match="10000"):
            derive.analyze(_timer(), "frequency", draws=100)


class TestMonteCarlo:
    def test_seeded_is_repeatable(self):
        a = derive.analyze(_timer(), "frequency", draws=10_000, seed=5).monte_carlo
        b = derive.analyze(_timer(), "frequency", draws=10_000, seed=5).monte_carlo
        c = derive.analyze(_timer(), "frequency", draws=10_000, seed=6).monte_carlo
        assert a == b and a["mean"] != c["mean"]

    def test_yield_converges_to_brute_force(self):
        # brute-force reference computed here: midpoint-rule integration of the uniform part
        # density over a 160³ grid of (R1, R2, C) — deterministic, no sampling
        circ = _timer()
        window = (950.0, 1050.0)
        k = 160
        axes = [np.linspace(p.low, p.high, k + 1) for p in (circ.parts["R1"], circ.parts["R2"], circ.parts["C"])]
        mids = [0.5 * (a[1:] + a[:-1]) for a in axes]
        r1, r2, c = np.meshgrid(*mids, indexing="ij", sparse=True)
        f = 1 / (math.log(2) * (r1 + 2 * r2) * c)  # handbook formula (docs/references.md)
        ref = float(np.mean((f >= window[0]) & (f <= window[1])))
        errors = []
        for n in (10_000, 40_000, 160_000):
            mc = derive.analyze(circ, "frequency", draws=n, seed=2024, window=window).monte_carlo
            sigma = math.sqrt(ref * (1 - ref) / n)  # binomial standard error
            assert abs(mc["yield"] - ref) < 4 * sigma + 2e-3  # 2e-3: grid error of the reference
            assert_allclose(mc["yield_u"], sigma, rtol=0.05)
            errors.append(abs(mc["yield"] - ref))
        assert 0.3 < ref < 0.9

    def test_normal_distribution_stays_in_band(self):
        circ = _ladder()
        d = derive.analyze(circ, "frequency", draws=10_000, seed=3, distribution="normal")
        u = derive.analyze(circ, "frequency", draws=10_000, seed=3, distribution="uniform")
        # tolerance = 3σ is narrower than a rectangular band of the same width (σ = a/√3)
        assert d.monte_carlo["std"] < u.monte_carlo["std"]
        assert d.low <= d.monte_carlo["min"] and d.monte_carlo["max"] <= d.high

    def test_spread_matches_linearised_estimate(self):
        # GUM (JCGM 100:2008) law of propagation: f ∝ 1/(ln2 (R1+2R2) C); rectangular parts
        # u = a/√3; first-order sensitivity gives σ_f/f
        circ = _timer()
        mc = derive.analyze(circ, "frequency", draws=40_000, seed=9).monte_carlo
        R1, R2 = 1e3, 6.8e3
        s = R1 + 2 * R2
        rel = math.sqrt((R1 * 0.05 / math.sqrt(3) / s) ** 2 + (2 * R2 * 0.05 / math.sqrt(3) / s) ** 2
                        + (0.10 / math.sqrt(3)) ** 2)
        f0 = 1 / (math.log(2) * s * 100e-9)
        assert_allclose(mc["std"], rel * f0, rtol=0.05)


class TestWindow:
    def test_margin_widens(self):
        circ = _ladder()
        d = derive.analyze(circ, "frequency", draws=10_000)
        w = derive.derived_window(circ, d, margin=parse_tolerance("5 %"))
        assert_allclose([w.low, w.high], [d.low * 0.95, d.high * 1.05])
        assert "64 tolerance corners" in w.derived_from and "margin" in w.derived_from
        w2 = derive.derived_window(circ, d, margin=parse_tolerance("±10 Hz", "Hz"))
        assert_allclose([w2.low, w2.high], [d.low - 10, d.high + 10])
        assert w.details["gain_needed"]["nominal"] == pytest.approx(29.0)


@pytest.mark.parametrize("form", ["highpass", "lowpass"])
def test_ladder_frequency_falls_with_every_part(form):
    # the corner enumeration is exact if f is monotonic in each part; checked here by
    # perturbing each part of random ladders (with source and load) by +1 % (common practice)
    from benchgate.plan.network import rc_ladder

    rng = np.random.default_rng(42)
    m, n = 300, 4
    R, C = rng.uniform(1e3, 100e3, (m, n)), rng.uniform(1e-9, 100e-9, (m, n))
    src, load = rng.uniform(0, 20e3, m), rng.uniform(5e3, 1e6, m)
    f0 = rc_ladder(R, C, form=form, source=src, load=load)["frequency"]
    assert np.all(np.isfinite(f0))
    for j in range(2 * n + 2):
        R2, C2, s2, l2 = R.copy(), C.copy(), src.copy(), load.copy()
        if j < n:
            R2[:, j] *= 1.01
        elif j < 2 * n:
            C2[:, j - n] *= 1.01
        elif j == 2 * n:
            s2 = src * 1.01 + 1.0
        else:
            l2 = load * 1.01
        f1 = rc_ladder(R2, C2, form=form, source=s2, load=l2)["frequency"]
        assert np.all(f1 <= f0 * (1 + 1e-12)), j
