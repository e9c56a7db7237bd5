"""The report's own small SVG plotting: ticks, axis prefixes, escaping, where a value sits."""

from __future__ import annotations

import math
import re

import pytest
from hypothesis import assume, given
from hypothesis import strategies as st

from benchgate.report import svg


@given(st.floats(-1e6, 1e6), st.floats(1e-6, 1e6))
def test_nice_ticks_are_round_even_and_cover_the_range(lo, span):
    assume(span > abs(lo) * 1e-6)  # plots never zoom to a millionth of their offset
    hi = lo + span
    ticks = svg.nice_ticks(lo, hi, 5)
    assert 2 <= len(ticks) <= 11
    steps = [b - a for a, b in zip(ticks, ticks[1:], strict=False)]
    step = steps[0]
    assert all(math.isclose(s, step, rel_tol=1e-6) for s in steps)
    # Heckbert, "Nice numbers for graph labels", Graphics Gems (1990): 1, 2 or 5 × 10^n
    mantissa = step / 10 ** math.floor(math.log10(step) + 1e-12)
    assert any(math.isclose(mantissa, m, rel_tol=1e-6) for m in (1, 2, 5, 10))
    assert ticks[0] >= lo - step * 1e-6 and ticks[0] - step < lo
    assert ticks[-1] <= hi + step * 1e-6 and ticks[-1] + step > hi


def test_nice_ticks_known_answers():
    # common practice, no source: the ticks a person would draw
    assert svg.nice_ticks(0, 10, 6) == [0, 2, 4, 6, 8, 10]
    assert svg.nice_ticks(0.6, 2.7, 5) == pytest.approx([1.0, 1.5, 2.0, 2.5])
    assert svg.nice_ticks(-100, 10, 5) == [-100, -80, -60, -40, -20, 0]


def test_axis_prefixes():
    assert svg.axis_scale(0.25, "s") == (1e-3, "ms")
    assert svg.axis_scale(11_000, "Hz") == (1e3, "kHz")
    assert svg.axis_scale(2.7, "V") == (1.0, "V")
    assert svg.axis_scale(80, "dB") == (1.0, "dB")


def test_escaping_of_markup_and_control_characters():
    assert svg.esc('<a href="x">&\x1b') == "&lt;a href=&quot;x&quot;&gt;&amp;\\x1b"


def _xs(drawing: str, pattern: str) -> list[float]:
    return [float(x) for x in re.findall(pattern, drawing)]


def test_check_bar_places_the_value_by_linear_mapping():
    d = svg.check_bar(1.0, 0.05, 0.6, 1.4, unit="V", verdict="pass")
    edges = _xs(d, r'<line x1="([0-9.]+)" y1="[0-9.]+" x2="\1" y2="[0-9.]+" stroke="#2f7d4f" stroke-width="2"')
    (cx,) = _xs(d, r'<circle cx="([0-9.]+)"')
    assert len(edges) == 2
    assert cx == pytest.approx((edges[0] + edges[1]) / 2, abs=0.11)  # 1.0 is mid-window
    assert "1.000 V ± 50 mV" in d


def test_check_bar_outside_value_and_open_window():
    d = svg.check_bar(7.5, 0.3, None, 5.0, unit="%", verdict="fail")
    (edge,) = _xs(d, r'<line x1="([0-9.]+)" y1="[0-9.]+" x2="\1" y2="[0-9.]+" stroke="#2f7d4f" stroke-width="2"')
    (cx,) = _xs(d, r'<circle cx="([0-9.]+)"')
    assert cx > edge and svg.VERDICT_COLOURS["fail"] in d
    assert "no valid value" in svg.check_bar(None, None, 1.0, 2.0, unit="V", verdict="error")


def test_plots_degrade_to_a_note_on_empty_data():
    assert "too few samples" in svg.waveform([0.0], [1.0])
    assert "no spectrum" in svg.spectrum([], [])
