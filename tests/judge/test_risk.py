"""Specific conformity risk (JCGM 106:2012) and the ``risk`` decision rule."""

from __future__ import annotations

import json
import math

import numpy as np
import pytest
from scipy.stats import norm

from benchgate.analysis import Measurement
from benchgate.judge import Verdict, judge
from benchgate.judge.risk import (
    format_risk,
    probability_inside,
    probability_outside,
    probability_outside_array,
    specific_risk,
)
from benchgate.plan.limits import Window
from benchgate.record import CheckRecord

W = Window(unit="Hz", low=900.0, high=1000.0, nominal=950.0)


def m(value, U=None):
    return Measurement("frequency", value, "Hz", U)


class TestPublishedValues:
    def test_guard_band_w_equals_U_one_sided(self):
        # ILAC-G8:09/2019 4.2.2 / JCGM 106:2012 clause 8: acceptance limit one guard band w = U
        # (= 2u) inside the tolerance limit gives a specific consumer's risk of Φ(−2) = 2.275 %
        # at the acceptance limit (standard normal table; value in /work/shared/REFERENCES.md).
        p = probability_outside(1000.0 - 2 * 0.5, 0.5, None, 1000.0)
        assert p == pytest.approx(0.02275, abs=5e-6)
        r = specific_risk("pass", 999.0, 1.0, None, 1000.0)  # U = 1 Hz -> u = 0.5 Hz
        assert r.kind == "false pass" and r.probability == pytest.approx(0.02275, abs=5e-6)

    def test_fifty_percent_at_the_limit(self):
        # JCGM 106:2012 clause 7 (from memory) / ILAC-G8:09/2019 4.2.1: a measured value on the
        # tolerance limit has a conformance probability of 50 % under a symmetric PDF.
        assert probability_outside(1000.0, 3.0, 900.0, 1000.0) == pytest.approx(0.5, abs=1e-12)
        assert probability_inside(900.0, 3.0, 900.0, None) == pytest.approx(0.5, abs=1e-12)

    def test_centred_two_sided_window_of_plus_minus_2u(self):
        # JCGM 100:2008 (GUM) Table G.1: k = 2 gives a coverage probability of 95.45 %
        assert probability_inside(0.0, 1.0, -2.0, 2.0) == pytest.approx(0.9545, abs=5e-5)

    def test_jcgm_106_two_limit_worked_example(self):
        # JCGM 106:2012 clause 7.4, example (two tolerance limits): measured value y = 13.6,
        # standard uncertainty u = 1.8, tolerance limits T_L = 12.5 and T_U = 16.3. Inputs as
        # quoted, to check against the guide, by metrologyrules.com (2022-03, "decision rules"
        # post); the guide's conformance probability p_c ≈ 0.66 is from memory. The two tails by
        # the standard normal table: Φ(−0.611) = 0.2706 below T_L, 1 − Φ(1.500) = 0.0668 above T_U.
        y, u, lo, hi = 13.6, 1.8, 12.5, 16.3
        assert probability_inside(y, u, lo, hi) == pytest.approx(0.66, abs=0.005)
        assert probability_outside(y, u, lo, hi) == pytest.approx(0.34, abs=0.005)
        assert probability_outside(y, u, lo, None) == pytest.approx(0.2706, abs=5e-5)
        assert probability_outside(y, u, None, hi) == pytest.approx(0.0668, abs=5e-5)
        # as a decision: a pass on this value carries a ~34 % risk of a false pass (U = 2u)
        r = specific_risk("pass", y, 2 * u, lo, hi)
        assert r.kind == "false pass" and r.probability == pytest.approx(0.3374, abs=5e-4)

    def test_five_and_one_percent_quantiles(self):
        # standard normal table (handbook values, from memory): Φ(−1.645) = 5.0 %, Φ(−2.326) = 1.0 %
        assert probability_outside(1.645, 1.0, 0.0, None) == pytest.approx(0.0500, abs=5e-5)
        assert probability_outside(2.326, 1.0, 0.0, None) == pytest.approx(0.0100, abs=5e-5)


class TestAgainstScipy:
    def test_random_cases(self):
        rng = np.random.default_rng(106)
        for _ in range(2000):
            lo = rng.normal(0, 5)
            hi = lo + rng.uniform(0.01, 20)
            u = 10 ** rng.uniform(-2, 1)
            y = rng.uniform(lo - 6 * u, hi + 6 * u)
            side = rng.integers(3)
            low = None if side == 1 else lo
            high = None if side == 2 else hi
            # scipy.stats.norm reference: p_c = Φ((T_U − y)/u) − Φ((T_L − y)/u)
            ref_in = (norm.cdf(high, y, u) if high is not None else 1.0) - (
                norm.cdf(low, y, u) if low is not None else 0.0)
            assert probability_inside(y, u, low, high) == pytest.approx(ref_in, abs=1e-13)
            assert probability_outside(y, u, low, high) == pytest.approx(1 - ref_in, abs=1e-13)

    def test_tiny_risks_keep_their_digits(self):
        # scipy.stats.norm.sf reference, relative accuracy far in the tail where 1 − p_c would
        # round to zero in double precision
        for z in (8.0, 12.0, 20.0):
            assert probability_outside(0.0, 1.0, -z, None) == pytest.approx(norm.sf(z), rel=1e-12)
            assert probability_inside(-z, 1.0, 0.0, 1.0) == pytest.approx(norm.sf(z) - norm.sf(z + 1), rel=1e-9)
            assert probability_inside(z + 5.0, 1.0, 0.0, 5.0) == pytest.approx(norm.sf(z) - norm.sf(z + 5), rel=1e-9)

    def test_array_version_matches_scalar(self):
        rng = np.random.default_rng(7)
        y = rng.uniform(-3, 3, 500)
        u = rng.uniform(0.1, 2, 500)
        got = probability_outside_array(y, u, -1.0, 1.5)
        want = np.array([probability_outside(a, b, -1.0, 1.5) for a, b in zip(y, u, strict=True)])
        assert np.allclose(got, want, rtol=1e-12, atol=1e-15)

    def test_exact_value_without_uncertainty(self):
        assert probability_outside(1000.0, 0.0, 900.0, 1000.0) == 0.0
        assert probability_outside(1000.1, 0.0, 900.0, 1000.0) == 1.0
        with pytest.raises(ValueError):
            probability_outside(math.nan, 1.0, 0.0, 1.0)


class TestRiskBesideTheVerdict:
    def test_pass_states_risk_of_false_pass(self):
        v = judge(m(999.0, 1.0), W, "simple")
        assert v.verdict is Verdict.PASS
        assert v.risk.kind == "false pass"
        # ILAC-G8:09/2019 4.2.2: U from the limit -> Φ(−2) = 2.275 % (REFERENCES.md)
        assert v.risk.probability == pytest.approx(0.02275, abs=5e-6)

    def test_fail_states_risk_of_false_fail(self):
        v = judge(m(1001.0, 2.0), W, "simple")
        assert v.verdict is Verdict.FAIL and v.risk.kind == "false fail"
        # scipy.stats.norm reference: P(X in window) for N(1001, 1²)
        assert v.risk.probability == pytest.approx(norm.cdf(1000, 1001, 1) - norm.cdf(900, 1001, 1), rel=1e-12)

    def test_no_risk_without_uncertainty_or_decision(self):
        assert judge(m(950.0), W, "simple").risk is None
        assert judge(m(999.5, 2.0), W, "guarded").risk is None  # inconclusive
        assert judge(None, W, "simple").risk is None

    def test_record_round_trip_and_kind(self):
        v = judge(m(950.0, 10.0), W, "guarded")
        rec = CheckRecord("c", "frequency", W, m(950.0, 10.0), v.verdict, v.reason, v.rule,
                          v.risk.probability)
        d = json.loads(json.dumps(rec.to_dict()))
        assert d["risk"]["kind"] == "false pass"
        # scipy.stats.norm reference: two tails of N(950, 5²) beyond 900 and 1000
        assert d["risk"]["probability"] == pytest.approx(2 * norm.sf(10.0), rel=1e-9)
        back = CheckRecord.from_dict(d)
        assert back.risk == rec.risk and back.risk_kind == "false pass"


class TestRiskRule:
    def test_pass_only_below_max_risk(self):
        # u = 0.5 Hz: risk of a false pass 3 u inside the upper limit is Φ(−3) = 0.135 %
        # (standard normal table, from memory), below 1 %: pass
        v = judge(m(998.5, 1.0), W, "risk", 0.01)
        assert v.verdict is Verdict.PASS and v.rule == "risk"
        assert v.risk.probability == pytest.approx(norm.sf(3.0), rel=1e-9)
        assert "risk of a false pass" in v.reason
        # 2 u inside: Φ(−2) = 2.275 % > 1 %: neither decision -> inconclusive
        v = judge(m(999.0, 1.0), W, "risk", 0.01)
        assert v.verdict is Verdict.INCONCLUSIVE and v.risk is None
        # ... but below a 5 % limit: pass
        assert judge(m(999.0, 1.0), W, "risk", 0.05).verdict is Verdict.PASS

    def test_fail_only_below_max_risk(self):
        v = judge(m(1001.5, 1.0), W, "risk", 0.01)
        assert v.verdict is Verdict.FAIL and v.risk.kind == "false fail"
        assert judge(m(1000.8, 1.0), W, "risk", 0.01).verdict is Verdict.INCONCLUSIVE

    def test_threshold_is_the_quantile(self):
        # the acceptance limit of the risk rule is T_U − z u with Φ(−z) = max_risk
        # (JCGM 106:2012 clause 8, guarded acceptance; scipy.stats.norm.isf reference)
        u = 0.5
        z = norm.isf(0.01)
        assert judge(m(1000 - (z + 1e-6) * u, 2 * u), Window("Hz", high=1000.0), "risk", 0.01).verdict is Verdict.PASS
        assert judge(m(1000 - (z - 1e-6) * u, 2 * u), Window("Hz", high=1000.0), "risk", 0.01).verdict is Verdict.INCONCLUSIVE

    def test_window_max_risk_overrides_plan(self):
        w = Window(unit="Hz", low=900.0, high=1000.0, decision="risk", max_risk=0.05)
        assert judge(m(999.0, 1.0), w, "simple", 0.01).verdict is Verdict.PASS

    def test_no_uncertainty_is_inconclusive_never_pass(self):
        assert judge(m(950.0), W, "risk", 0.01).verdict is Verdict.INCONCLUSIVE

    def test_missing_max_risk_is_error(self):
        assert judge(m(950.0, 1.0), W, "risk").verdict is Verdict.ERROR


def test_format_risk():
    assert format_risk(0.02275) in ("2.27 %", "2.28 %")  # float rounding of 2.275
    assert format_risk(1e-6) == "0.0001 %"
    assert format_risk(0.0) == "0 %"
