"""An adaptive capture step keeps the tone fit's sums from look to look for a long capture
(benchgate.analysis._growing), and analyses every look afresh for a short one."""

from __future__ import annotations

from types import SimpleNamespace

import numpy as np

from benchgate.analysis import Capture
from benchgate.analysis._growing import WORTH_SAMPLES, GrowingFit
from benchgate.analysis.core import Analysis
from benchgate.runner.adaptive import acquire_adaptive


class GrowingRecorder:
    """Hands over the prefixes of one capture at the looks, as the serial ADC's looks do."""

    def __init__(self, rate: float):
        self.rate = rate

    def capture_growing(self, channel, *, looks, rate=None, progress=None, decide):
        n = int(round(looks[-1] * self.rate))
        x = np.sin(np.arange(n) * 0.1)
        for seconds in looks[:-1]:
            cap = Capture(x[: int(round(seconds * self.rate))], self.rate)
            if decide(cap):
                return cap
        return Capture(x, self.rate)


def _step(rate: float, longest: float):
    window = SimpleNamespace(decision=None, max_risk=None, low=0.0, high=1.0)
    return SimpleNamespace(adaptive=SimpleNamespace(shortest=longest / 4, longest=longest, block=None),
                           checks=[SimpleNamespace(measurement="frequency", window=window)],
                           channel="out", rate=rate, harmonics=10)


def _analysis(capture: Capture) -> Analysis:
    return Analysis(warnings=(), measurements={}, steady_start=0.0, fundamental=None, harmonics=())


def test_long_capture_keeps_one_growing_fit_over_its_looks():
    seen = []

    def analyze(capture, names, *, harmonics=10, views=False, growing=None):
        seen.append(growing)
        return _analysis(capture)

    rate = 50_000.0
    step = _step(rate, WORTH_SAMPLES / rate)
    acquire_adaptive(GrowingRecorder(rate), step, "guarded", None, analyze)
    assert len(seen) == 4 and isinstance(seen[0], GrowingFit)
    assert all(g is seen[0] for g in seen)  # the same sums, from look to look


def test_short_capture_is_analysed_afresh_at_every_look():
    seen = []

    def analyze(capture, names, *, harmonics=10, views=False, growing=None):
        seen.append(growing)
        return _analysis(capture)

    step = _step(50_000.0, 0.5)  # 25 000 samples: keeping sums would cost more than it saves
    acquire_adaptive(GrowingRecorder(50_000.0), step, "guarded", None, analyze)
    assert seen and all(g is None for g in seen)


def test_an_analysis_without_the_growing_argument_still_works():
    calls = []

    def analyze(capture, names, *, harmonics=10):
        calls.append(capture.n)
        return _analysis(capture)

    rate = 50_000.0
    acquire_adaptive(GrowingRecorder(rate), _step(rate, WORTH_SAMPLES / rate), "guarded", None, analyze)
    assert len(calls) == 4
