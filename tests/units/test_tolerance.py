"""Tolerances and toleranced part values."""

from __future__ import annotations

import math

import pytest

from benchgate.errors import QuantityError
from benchgate.units import parse_part, parse_tolerance


class TestTolerance:
    @pytest.mark.parametrize(
        ("text", "minus", "plus"),
        [("±5 %", 0.05, 0.05), ("5%", 0.05, 0.05), ("± 1%", 0.01, 0.01), ("+/-10 %", 0.1, 0.1),
         ("+10/-5 %", 0.05, 0.10), ("+10 %/-5 %", 0.05, 0.10), (5, 0.05, 0.05)],
    )
    def test_relative(self, text, minus, plus):
        t = parse_tolerance(text)
        assert t.relative
        assert math.isclose(t.minus, minus) and math.isclose(t.plus, plus)

    def test_bounds_asymmetric(self):
        # common practice, no source: +a/-b means nominal·(1-b) … nominal·(1+a)
        lo, hi = parse_tolerance("+10/-5 %").bounds(1000.0)
        assert math.isclose(lo, 950.0) and math.isclose(hi, 1100.0)

    def test_absolute(self):
        t = parse_tolerance("±12 Hz", "Hz")
        assert not t.relative and t.minus == t.plus == 12.0
        assert t.bounds(1000.0) == (988.0, 1012.0)
        t = parse_tolerance("±20 mV", "V")
        assert math.isclose(t.plus, 0.02)

    def test_absolute_wrong_dimension(self):
        with pytest.raises(QuantityError, match="frequency"):
            parse_tolerance("±12 V", "Hz", field="tolerance")

    # IEC 60062 tolerance letters: F ±1 %, J ±5 %, K ±10 %, M ±20 % (docs/references.md; J and M from memory)
    @pytest.mark.parametrize(("letter", "pct"), [("F", 1), ("J", 5), ("K", 10), ("M", 20)])
    def test_letters(self, letter, pct):
        t = parse_tolerance(letter)
        assert math.isclose(t.plus, pct / 100) and t.relative

    @pytest.mark.parametrize("bad", ["", "±", "five", "-5 %", "±5 furlongs", True, None])
    def test_bad(self, bad):
        with pytest.raises(QuantityError):
            parse_tolerance(bad, "Hz")


class TestPart:
    def test_resistor(self):
        p = parse_part("6k8 ±5%", "Ω")
        assert p.nominal == 6800.0 and math.isclose(p.low, 6460.0) and math.isclose(p.high, 7140.0)

    def test_capacitor_forms(self):
        for text in ("10n ±10%", "10 nF 10%", "10nF ± 10%", "10n K"):
            p = parse_part(text, "F")
            assert math.isclose(p.nominal, 10e-9) and math.isclose(p.tolerance.plus, 0.10), text

    def test_glued_letter(self):
        # IEC 60062: code followed by its tolerance letter, as printed on parts
        p = parse_part("4K7J", "Ω")
        assert p.nominal == 4700.0 and math.isclose(p.tolerance.plus, 0.05)

    def test_farad_is_not_a_tolerance_letter(self):
        p = parse_part("100 F", "F")
        assert p.nominal == 100.0 and p.tolerance.plus == 0.0

    def test_exact_without_tolerance(self):
        p = parse_part("16k", "Ω")
        assert p.low == p.high == 16000.0

    @pytest.mark.parametrize("bad", ["0 ±5%", "-1k", "10k ±150%", "2n2", "lots"])
    def test_bad_resistors(self, bad):
        with pytest.raises(QuantityError):
            parse_part(bad, "Ω", field="R")


class TestAmbiguous:
    # issue 9: "±5" could be 5 % or 5 of the unit; a bare YAML number stays percent (documented)
    @pytest.mark.parametrize("bad", ["±5", "+/-5", "+10/-5", "± 2.5"])
    def test_plus_minus_without_unit(self, bad):
        with pytest.raises(QuantityError, match="unit"):
            parse_tolerance(bad, "Hz")

    @pytest.mark.parametrize("bad", [float("nan"), float("inf"), "±nan %", "inf %", "1e999 %",
                                     "+1e999/-5 %", 10**400])
    def test_non_finite(self, bad):
        with pytest.raises(QuantityError, match="finite"):
            parse_tolerance(bad, "V")


class TestSpacedLetters:
    # issue 9: with a space, a letter after a bare number is an SI prefix or an error, never a
    # tolerance code (the old code read "47 K" as 47 Ω ±10 % and "1 M" as 1 Ω ±20 %)
    def test_prefix_after_space(self):
        p = parse_part("47 K", "Ω")
        assert p.nominal == 47e3 and p.tolerance.plus == 0.0
        p = parse_part("1 M", "Ω")
        assert p.nominal == 1e6 and p.tolerance.plus == 0.0

    @pytest.mark.parametrize("bad", ["47 J", "47 B", "47 D"])
    def test_non_prefix_letter_refused(self, bad):
        with pytest.raises(QuantityError, match="not an SI prefix"):
            parse_part(bad, "Ω", field="R")

    def test_code_then_letter_is_still_a_tolerance(self):
        # IEC 60062: a complete value followed by its tolerance letter
        assert math.isclose(parse_part("16k J", "Ω").tolerance.plus, 0.05)
        assert math.isclose(parse_part("47 k J", "Ω").tolerance.plus, 0.05)

    def test_inductor_part(self):
        p = parse_part("4u7 ±20%", "H", field="L")
        assert math.isclose(p.nominal, 4.7e-6) and math.isclose(p.tolerance.plus, 0.2)
