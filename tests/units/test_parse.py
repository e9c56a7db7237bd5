"""Engineering numbers: SI prefixes, unit symbols, IEC 60062 letter codes, dimension checks."""

from __future__ import annotations

import math

import pytest

from benchgate.errors import NotFiniteError, QuantityError
from benchgate.units import parse_quantity, parse_value
from benchgate.units.parse import parse_rate


class TestPrefixes:
    # BIPM SI Brochure, 9th edition, table 7 (prefixes p n µ m k M G)
    @pytest.mark.parametrize(
        ("text", "value", "unit"),
        [
            ("20 kHz", 20e3, "Hz"),
            ("1.5 V", 1.5, "V"),
            ("250 ms", 0.25, "s"),
            ("47 nF", 47e-9, "F"),
            ("3.3 pF", 3.3e-12, "F"),
            ("10 µA", 10e-6, "A"),  # MICRO SIGN
            ("10 \u03bcA", 10e-6, "A"),  # GREEK SMALL LETTER MU
            ("10 uA", 10e-6, "A"),  # ASCII u for micro, common practice
            ("2 MΩ", 2e6, "Ω"),
            ("2 M\u2126", 2e6, "Ω"),  # OHM SIGN normalises to omega
            ("4.7 kohm", 4.7e3, "Ω"),
            ("1 GHz", 1e9, "Hz"),
            ("50 kS/s", 50e3, "Hz"),
            ("10 mH", 10e-3, "H"),
            ("5 %", 5.0, "%"),
            ("-3 dB", -3.0, "dB"),
            ("12 bits", 12.0, "bits"),
            ("2 Hz/s", 2.0, "Hz/s"),
            ("1e3 Hz", 1e3, "Hz"),
            (".5 V", 0.5, "V"),
        ],
    )
    def test_prefixed_values(self, text, value, unit):
        q = parse_quantity(text)
        assert q.unit == unit
        assert math.isclose(q.value, value, rel_tol=1e-15)

    def test_prefix_scaling_is_exact_in_decimal(self):
        # 47 nF must be the same float as the literal 47e-9 (one rounding, not two)
        assert parse_value("47 nF", "F") == 47e-9
        assert parse_value("2.2 uF", "F") == 2.2e-6

    def test_bare_number_takes_expected_unit(self):
        assert parse_quantity(9, "V").value == 9.0
        assert parse_quantity("9", "V").unit == "V"
        assert parse_quantity("10k", "ohm").value == 10e3

    def test_no_prefix_on_ratios(self):
        with pytest.raises(QuantityError):
            parse_quantity("5 k%")
        with pytest.raises(QuantityError):
            parse_quantity("3 mdB")

    @pytest.mark.parametrize("bad", ["", "   ", "fast", "1..2 V", "1 V V", "1 furlong", "nan", "inf Hz"])
    def test_unreadable(self, bad):
        with pytest.raises(QuantityError):
            parse_quantity(bad)

    @pytest.mark.parametrize("bad", [True, None, [1], {"a": 1}, float("nan"), float("inf")])
    def test_not_numbers(self, bad):
        with pytest.raises(QuantityError):
            parse_quantity(bad, "V")


class TestLetterCodes:
    # IEC 60062 letter-and-digit code examples (docs/references.md)
    @pytest.mark.parametrize(
        ("text", "value", "unit"),
        [
            ("R47", 0.47, "Ω"),
            ("4R7", 4.7, "Ω"),
            ("4K7", 4.7e3, ""),
            ("4k7", 4.7e3, ""),
            ("47K3", 47.3e3, ""),
            ("4M7", 4.7e6, ""),
            ("1M0", 1.0e6, ""),
            ("2n2", 2.2e-9, "F"),
            ("4n7", 4.7e-9, "F"),
            ("1µ0", 1.0e-6, "F"),
            ("1u0", 1.0e-6, "F"),
            ("6p8", 6.8e-12, "F"),
        ],
    )
    def test_codes(self, text, value, unit):
        q = parse_quantity(text)
        assert q.unit == unit
        assert math.isclose(q.value, value, rel_tol=1e-15)

    def test_code_with_expected_unit(self):
        assert parse_quantity("4k7", "Ω").value == 4700.0
        assert parse_quantity("6k8", "ohm").unit == "Ω"

    def test_capacitor_code_is_not_a_resistance(self):
        with pytest.raises(QuantityError, match="capacitance"):
            parse_quantity("2n2", "Ω", field="R")

    def test_resistor_code_is_not_a_capacitance(self):
        with pytest.raises(QuantityError, match="resistance"):
            parse_quantity("4R7", "F", field="C")


class TestDimensions:
    def test_frequency_in_volts_names_the_field(self):
        with pytest.raises(QuantityError) as exc:
            parse_quantity("1.2 V", "Hz", field="steps[2].checks.frequency.max")
        msg = str(exc.value)
        assert msg.startswith("steps[2].checks.frequency.max:")
        assert "frequency" in msg and "voltage" in msg

    def test_time_for_current(self):
        with pytest.raises(QuantityError, match="current_limit: expected a current in A, got a time"):
            parse_quantity("50 ms", "A", field="current_limit")

    def test_unknown_expected_unit(self):
        with pytest.raises(QuantityError):
            parse_quantity("1", "furlong")


class TestFiniteOnly:
    # issue 9: NaN and infinity are never a value of a plan or station field
    @pytest.mark.parametrize("bad", ["nan", "NaN V", "-inf", "inf Hz", "Infinity", "1e999 Hz",
                                     "9" * 400, float("nan"), float("inf"), 10**400])
    def test_refused(self, bad):
        with pytest.raises(NotFiniteError, match="finite"):
            parse_quantity(bad, "Hz", field="rate")


class TestInductanceCodes:
    def test_rkm_for_inductance(self):
        # IEC 60062 letter-position rule applied to inductors (from memory): 4u7 = 4.7 µH
        q = parse_quantity("4u7", "H")
        assert q.unit == "H" and math.isclose(q.value, 4.7e-6, rel_tol=1e-15)
        assert math.isclose(parse_quantity("100n", "H").value, 100e-9, rel_tol=1e-15)
        # without an expected unit the code still reads as a capacitance
        assert parse_quantity("4u7").unit == "F"

    def test_r_is_not_read_as_henry(self):
        # "4R7" on an inductor commonly means 4.7 µH; refuse rather than read 4.7 H
        with pytest.raises(QuantityError, match="inductance"):
            parse_quantity("4R7", "H", field="L")


class TestRate:
    # one reader for every sample rate (analyze --rate, capture --rate)
    @pytest.mark.parametrize(("text", "hz"), [("48k", 48e3), ("48 kHz", 48e3), ("50 kS/s", 50e3),
                                              ("48000", 48e3), ("1.5M", 1.5e6), (44100, 44100.0)])
    def test_accepted(self, text, hz):
        assert parse_rate(text) == hz

    @pytest.mark.parametrize("bad", ["0", "-48k", "nan", "48 V", "fast", "inf"])
    def test_refused(self, bad):
        with pytest.raises(QuantityError):
            parse_rate(bad)
