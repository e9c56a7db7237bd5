"""Printing values with SI prefixes."""

from __future__ import annotations

import pytest

from benchgate.units import format_quantity, parse_quantity


@pytest.mark.parametrize(("value", "unit", "text"), [
    (1182.0, "Hz", "1.182 kHz"), (0.0004, "Hz", "400.0 µHz"), (2.5, "%", "2.500 %"),
    (0.05, "A", "50.00 mA"), (6800.0, "Ω", "6.800 kΩ"), (1e-8, "F", "10.00 nF"), (0.0, "V", "0 V"),
    (None, "V", "—"), (1e300, "Hz", "1.000e+300 Hz"), (1e-300, "s", "1.000e-300 s"), (1e12, "%", "1.000e+12 %"),
])
def test_format(value, unit, text):
    assert format_quantity(value, unit) == text


@pytest.mark.parametrize("value", [1.234e-11, 4.7e-9, 0.0333, 955.51, 47.3e3, 2.2e6, 3.3e9])
def test_round_trip(value):
    # printing then parsing gives the value back to the printed precision (common practice)
    back = parse_quantity(format_quantity(value, "F", digits=6)).value
    assert back == pytest.approx(value, rel=1e-5)
