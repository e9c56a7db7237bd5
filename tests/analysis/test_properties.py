"""Property tests: random valid signals never raise; noise alone is never a valid tone;
every invalid measurement says why."""

from __future__ import annotations

import json
import math

import numpy as np
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from benchgate.analysis import Capture, analyze
from benchgate.common.names import MEASUREMENT_NAMES

SETTINGS = settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.too_slow])


@st.composite
def signals(draw):
    n = draw(st.integers(16, 6000))
    fs = draw(st.sampled_from([1.0, 1000.0, 44_100.0, 50_000.0, 1e6]))
    cycles = draw(st.floats(0.3, n / 2.05))
    amp = draw(st.floats(1e-6, 1e3))
    offset = draw(st.floats(-1e3, 1e3))
    snr = draw(st.one_of(st.none(), st.floats(-10, 100)))
    h3 = draw(st.floats(0, 0.5))
    seed = draw(st.integers(0, 2 ** 32 - 1))
    rng = np.random.default_rng(seed)
    k = np.arange(n)
    x = offset + amp * (np.sin(2 * np.pi * cycles * k / n + 0.1) + h3 * np.sin(6 * np.pi * cycles * k / n))
    if snr is not None:
        x = x + rng.normal(0, amp * math.sqrt(0.5 / 10 ** (snr / 10)), n)
    return Capture(x, fs)


@st.composite
def noise(draw):
    n = draw(st.integers(16, 20_000))
    sigma = draw(st.floats(1e-6, 1e3))
    offset = draw(st.floats(-10, 10))
    kind = draw(st.sampled_from(["normal", "uniform"]))
    rng = np.random.default_rng(draw(st.integers(0, 2 ** 32 - 1)))
    x = rng.normal(0, sigma, n) if kind == "normal" else rng.uniform(-sigma, sigma, n)
    return Capture(offset + x, 1000.0)


def _check_reasons(result):
    for name, m in result.measurements.items():
        assert m.name == name
        if not m.valid:
            assert isinstance(m.reason, str) and m.reason.strip()
        else:
            assert math.isfinite(m.value)
            assert m.uncertainty is None or (math.isfinite(m.uncertainty) and m.uncertainty >= 0)
    json.dumps(result.to_dict(), allow_nan=False)


class TestProperties:
    @SETTINGS
    @given(signals())
    def test_random_signals_never_raise(self, cap):
        result = analyze(cap)
        assert set(result.measurements) == set(MEASUREMENT_NAMES)
        _check_reasons(result)

    @SETTINGS
    @given(noise())
    def test_noise_is_never_a_valid_frequency(self, cap):
        result = analyze(cap)
        for name in ("frequency", "startup_time", "frequency_drift", "thd", "duty_cycle"):
            assert not result.measurements[name].valid, name
        amp = result.measurements["amplitude"]
        # no oscillation: the amplitude, when stated, is a bound whose interval reaches 0
        assert not amp.valid or (amp.details["no_oscillation"] and amp.value - amp.uncertainty <= 0)
        _check_reasons(result)

    @SETTINGS
    @given(st.lists(st.one_of(st.floats(allow_nan=True, allow_infinity=True, width=64)), min_size=0, max_size=200))
    def test_arbitrary_samples_never_raise(self, values):
        _check_reasons(analyze(Capture(np.array(values, dtype=float), 1000.0)))
