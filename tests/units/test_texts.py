"""The texts of a window and of value ± U, shared by verdict reasons, reports and the CLI."""

from __future__ import annotations

from benchgate.units.format import expected_count_text, value_text, window_text


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


def test_expected_count_never_in_exponent_form():
    # a lot of good units has a vanishing expected number of false passes: the page says
    # "< 0.001", not 5.89e-118 (common practice, no source: counts read as plain decimals)
    assert expected_count_text(5.89e-118) == "< 0.001"
    assert expected_count_text(0.0) == "0"
    assert expected_count_text(0.0042) == "0.004"
    assert expected_count_text(0.5228) == "0.523"
    assert expected_count_text(12.345) == "12.3"
    assert expected_count_text(1234.6) == "1235"
    assert expected_count_text(float("nan")) == "—"
