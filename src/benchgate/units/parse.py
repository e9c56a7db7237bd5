"""Reading engineering numbers: SI prefixes with unit symbols and IEC 60062 letter-and-digit codes.

All values come back in SI base units (Hz, V, A, s, Ω, F, H); ``%``, ``dB``, ``bits`` and ``Hz/s``
stay as written. A number without a unit takes the unit the caller expects.

>>> parse_quantity("20 kHz").value
20000.0
>>> parse_quantity("4k7", "ohm").value
4700.0
>>> parse_quantity("2n2", "F").value
2.2e-09
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass

from benchgate.errors import NotFiniteError, QuantityError

#: SI prefix letter -> factor. ``u`` is accepted for micro; both micro signs are accepted.
PREFIXES: dict[str, float] = {
    "p": 1e-12,
    "n": 1e-9,
    "u": 1e-6,
    "\u00b5": 1e-6,  # MICRO SIGN
    "\u03bc": 1e-6,  # GREEK SMALL LETTER MU
    "m": 1e-3,
    "": 1.0,
    "k": 1e3,
    "K": 1e3,  # IEC 60062 prints K for kilo in letter codes; accepted for numbers too
    "M": 1e6,
    "G": 1e9,
}

#: accepted spellings of a unit -> canonical symbol.
UNIT_ALIASES: dict[str, str] = {
    "Hz": "Hz",
    "hz": "Hz",
    "S/s": "Hz",  # samples per second, for sample rates
    "Sa/s": "Hz",
    "V": "V",
    "A": "A",
    "s": "s",
    "%": "%",
    "dB": "dB",
    "dBc": "dB",
    "\u03a9": "\u03a9",  # GREEK CAPITAL LETTER OMEGA (the canonical symbol)
    "\u2126": "\u03a9",  # OHM SIGN
    "ohm": "Ω",
    "ohms": "Ω",
    "Ohm": "Ω",
    "R": "Ω",
    "F": "F",
    "H": "H",
    "bits": "bits",
    "bit": "bits",
    "Hz/s": "Hz/s",
    "V/V": "V/V",
    "deg": "deg",
    "\u00b0": "deg",  # DEGREE SIGN
}

#: canonical unit -> what it measures, for error messages.
DIMENSIONS: dict[str, str] = {
    "Hz": "frequency",
    "V": "voltage",
    "A": "current",
    "s": "time",
    "%": "ratio in percent",
    "dB": "level in decibels",
    "Ω": "resistance",
    "F": "capacitance",
    "H": "inductance",
    "bits": "number of bits",
    "Hz/s": "frequency drift",
    "V/V": "voltage ratio",
    "deg": "angle in degrees",
    "": "plain number",
}

# Units that take no SI prefix (a prefix letter before them is an error).
_NO_PREFIX = {"%", "dB", "bits", "deg", "V/V"}

_NUMBER = r"[+-]?(?:\d+(?:\.\d*)?|\.\d+)(?:[eE][+-]?\d+)?"
_QUANTITY_RE = re.compile(rf"^\s*({_NUMBER})\s*(.*?)\s*$")
# IEC 60062 letter-and-digit code: digits, a letter standing for the decimal point, digits.
_RKM_RE = re.compile("^\\s*(\\d*)([Rrpnu\u00b5\u03bcmkKMG])(\\d+)\\s*(\u03a9|\u2126|ohms?|F|H)?\\s*$")
# letter -> (factor, units the letter may stand for; the first is taken when none is expected).
# IEC 60062 writes resistors with R (and k, M, G) and capacitors with p, n, µ (and m); inductors
# are written with the same letter-position rule (4u7 = 4.7 µH; IEC 60062, from memory). R is
# not accepted for an inductance: "4R7" on an inductor often means 4.7 µH, not 4.7 H.
_RKM_LETTERS: dict[str, tuple[float, tuple[str, ...] | None]] = {
    "R": (1.0, ("Ω",)),
    "r": (1.0, ("Ω",)),
    "k": (1e3, None),
    "K": (1e3, None),
    "M": (1e6, None),
    "G": (1e9, None),
    "m": (1e-3, None),
    "p": (1e-12, ("F", "H")),
    "n": (1e-9, ("F", "H")),
    "u": (1e-6, ("F", "H")),
    "\u00b5": (1e-6, ("F", "H")),
    "\u03bc": (1e-6, ("F", "H")),
}
# "nan", "inf", "infinity" (any case, signed), with or without a unit after them
_NONFINITE_RE = re.compile(r"^\s*[+-]?(?:nan|inf(?:inity)?)\b", re.IGNORECASE)




def finite(value: float, text: object, where: str = "") -> float:
    """``value`` when it is a finite number; NotFiniteError naming ``text`` otherwise.

    The one check every number read from a plan or a station goes through.
    """
    if not math.isfinite(value):
        raise NotFiniteError(f"{where}value must be a finite number, got {_short(text)}")
    return value


def _short(text: object) -> str:
    r = repr(text)
    return r if len(r) <= 40 else r[:37] + "..."


def _a(word: str) -> str:
    return f"an {word}" if word[:1] in "aeiou" else f"a {word}"


@dataclass(frozen=True)
class Quantity:
    """A number in SI base units with its canonical unit symbol (``""`` when none was written)."""

    value: float
    unit: str

    def __float__(self) -> float:
        return self.value


def dimension_name(unit: str) -> str:
    """Human name of what ``unit`` measures (``"frequency"`` for Hz)."""
    return DIMENSIONS.get(unit, unit)


def canonical_unit(unit: str) -> str:
    """The canonical symbol for an accepted spelling (``ohm`` -> ``Ω``); raises QuantityError."""
    if unit == "":
        return ""
    try:
        return UNIT_ALIASES[unit]
    except KeyError:
        raise QuantityError(f"unknown unit {unit!r}") from None


def _split_unit(rest: str) -> tuple[float, str]:
    """Split ``kHz`` into (1e3, "Hz"); a lone prefix letter (``k``) gives (1e3, "")."""
    if rest in UNIT_ALIASES:
        return 1.0, UNIT_ALIASES[rest]
    if rest and rest[0] in PREFIXES:
        prefix, sym = rest[0], rest[1:]
        if sym == "":
            return PREFIXES[prefix], ""
        if sym in UNIT_ALIASES and UNIT_ALIASES[sym] not in _NO_PREFIX and sym != "R":
            return PREFIXES[prefix], UNIT_ALIASES[sym]
    raise QuantityError(f"unknown unit {rest!r}")


def _parse_rkm(text: str, expected: str | None = None) -> Quantity | None:
    m = _RKM_RE.match(text)
    if not m:
        return None
    whole, letter, frac, sym = m.groups()
    factor, implied = _RKM_LETTERS[letter]
    value = _scaled(f"{whole or '0'}.{frac}", factor)
    if sym:
        unit = canonical_unit(sym)
    elif implied is None:
        unit = ""
    else:
        unit = expected if expected in implied else implied[0]
    if implied and unit and unit not in implied:
        raise QuantityError(f"letter code {text.strip()!r} mixes {letter!r} with unit {sym!r}")
    return Quantity(value, unit)


def parse_quantity(text: str | int | float, unit: str | None = None, *, field: str | None = None) -> Quantity:
    """Read one engineering number.

    Parameters
    ----------
    text : str or number
        ``"20 kHz"``, ``"1.5 V"``, ``"250 ms"``, ``"47 nF"``, ``"10 kS/s"``, an IEC 60062 code
        (``"4k7"``, ``"R47"``, ``"2n2"``, ``"1M0"``, ``"1µ0"``), or a plain number.
    unit : str, optional
        The unit the caller expects (any accepted spelling). A number written without a unit
        takes it; a number written with another unit is a dimension error.
    field : str, optional
        Name of the field being read, put in front of error messages.

    Returns
    -------
    Quantity
        Value in SI base units; ``unit`` is the expected unit when one was given.

    Raises
    ------
    QuantityError
        Not a number, an unknown unit, or the wrong dimension (the message names ``field``).

    References
    ----------
    IEC 60062 (letter-and-digit code); BIPM SI Brochure, 9th ed. (prefixes).
    """
    where = f"{field}: " if field else ""
    expected = None if unit is None else canonical_unit(unit)
    if isinstance(text, bool):
        raise QuantityError(f"{where}expected a number, got {text!r}")
    if isinstance(text, (int, float)):
        try:
            value = float(text)
        except OverflowError:  # an integer too large for a float
            raise NotFiniteError(f"{where}value must be a finite number, got {_short(text)}") from None
        got = ""
    elif isinstance(text, str):
        try:
            q = _parse_text(text, expected)
        except QuantityError as exc:
            raise type(exc)(f"{where}{exc}") from None
        value, got = q.value, q.unit
    else:
        raise QuantityError(f"{where}expected a number, got {type(text).__name__}")
    finite(value, text, where)
    if expected is not None and got and got != expected:
        raise QuantityError(
            f"{where}expected {_a(dimension_name(expected))} in {expected}, "
            f"got {_a(dimension_name(got))} ({text!r})"
        )
    return Quantity(value, expected if expected is not None else got)


def _parse_text(text: str, expected: str | None = None) -> Quantity:
    s = text.strip()
    if not s:
        raise QuantityError("expected a number, got an empty string")
    if _NONFINITE_RE.match(s):
        raise NotFiniteError(f"value must be a finite number, got {text!r}")
    rkm = _parse_rkm(s, expected)
    if rkm is not None:
        return rkm
    m = _QUANTITY_RE.match(s)
    if not m:
        raise QuantityError(f"expected a number with an optional unit, got {text!r}")
    number, rest = m.groups()
    factor, unit = _split_unit(rest) if rest else (1.0, "")
    return Quantity(_scaled(number, factor), unit)


def _scaled(number: str, factor: float) -> float:
    """``number × factor`` for a power-of-ten factor, rounded once (47 nF is exactly 4.7e-08)."""
    exp = round(math.log10(factor))
    return float(f"{number}e{exp}") if "e" not in number.lower() else float(number) * factor


def parse_value(text: str | int | float, unit: str, *, field: str | None = None) -> float:
    """Shortcut for ``parse_quantity(text, unit, field=field).value``."""
    return parse_quantity(text, unit, field=field).value


def parse_positive(text: str | int | float, unit: str, *, field: str | None = None) -> float:
    """A finite value greater than zero in ``unit`` (a duration, a sample rate, a voltage range).

    >>> parse_positive("48k", "Hz")
    48000.0
    """
    value = parse_value(text, unit, field=field)
    if not value > 0:
        where = f"{field}: " if field else ""
        raise QuantityError(f"{where}must be greater than zero, got {text!r}")
    return value


def parse_rate(text: str | int | float, *, field: str | None = None) -> float:
    """A sample rate in Hz: ``48k``, ``48 kHz``, ``50 kS/s``, ``48000``; finite and above zero.

    The one reader of rates for every command-line option and file that gives one.
    """
    return parse_positive(text, "Hz", field=field)
