"""Bode and transfer plots of the generator-driven steps."""

from __future__ import annotations

import math

from benchgate.report import svg
from benchgate.report.response_plots import bode, transfer


def _points(n=5):
    # a first-order low-pass at 1 kHz: |H| = 1/√(1 + (f/fc)²), arg H = −atan(f/fc) (handbook formula)
    out = []
    for k in range(n):
        f = 100.0 * 10 ** (k / 2)
        out.append({"frequency": f, "gain_db": -10 * math.log10(1 + (f / 1000) ** 2), "gain_u": 0.01,
                    "phase": -math.degrees(math.atan(f / 1000)), "phase_u": 0.1})
    return out


def test_bode_draws_mask_lines_and_verdict_colours():
    pts = _points()
    gain_svg, phase_svg = bode(pts, [[100.0, -1.0, 1.0], [10_000.0, None, -10.0]], {pts[0]["frequency"]: "pass",
                                                                                    pts[-1]["frequency"]: "fail"})
    assert gain_svg.count("<circle") == 5 and phase_svg.count("<circle") == 5
    assert svg.VERDICT_COLOURS["fail"] in gain_svg and svg.VERDICT_COLOURS["pass"] in gain_svg
    assert svg.WINDOW_EDGE in gain_svg  # the lower mask line (two corners) is drawn
    assert "1.0 kHz" in gain_svg  # decade ticks labelled in Hz on the log axis


def test_bode_says_why_it_draws_nothing():
    gain_svg, phase_svg = bode(_points(1), [], {})
    assert "fewer than two points" in gain_svg and "fewer than two points" in phase_svg
    no_phase = [dict(p, phase=None) for p in _points()]
    assert "valid phase" in bode(no_phase, [], {})[1]


def test_transfer_marks_the_clipping_point():
    pts = [{"input": v, "output": min(11 * v, 4.5), "thd": 0.01} for v in (0.1, 0.2, 0.3, 0.4, 0.5)]
    drawing = transfer(pts, 0.41)
    assert "clipping point 410.0 mV" in drawing and drawing.count("<circle") == 5
    assert "fewer than two valid levels" in transfer(pts[:1], None)
