"""The texts of a window and of value ± U, shared by verdict reasons, reports and the CLI."""

from __future__ import annotations

from benchgate.units.format import value_text, window_text


def test_window_text_all_shapes():
    assert window_text(880.0, 1030.0, "Hz") == "880.0 Hz … 1.030 kHz"
    assert window_text(0.6, None, "V") == "≥ 600.0 mV"
    assert window_text(None, 5.0, "%") == "≤ 5.000 %"
    assert window_text(None, None, "V") == "any value"


def test_value_text_with_and_without_u():
    assert value_text(951.2, 0.4, "Hz") == "951.2 Hz ± 400.0 mHz"
    # GUM (JCGM 100:2008) 7.2.6: U stated with at most two significant digits when asked
    assert value_text(951.2, 0.4, "Hz", u_digits=2) == "951.2 Hz ± 400 mHz"
    assert value_text(1.5, None, "V") == "1.500 V"
