"""Tolerances (``±5 %``, ``5%``, ``+10/-5 %``, ``±12 Hz``, IEC 60062 letters) and toleranced parts.

A tolerance in percent is relative to the nominal value; a tolerance with another unit is an
absolute deviation in that unit. ``+a/-b`` gives an asymmetric band.
"""

from __future__ import annotations

import re
from dataclasses import dataclass

from benchgate.errors import NotFiniteError, QuantityError
from benchgate.units.parse import PREFIXES, canonical_unit, dimension_name, finite, parse_quantity

#: IEC 60062 tolerance letters for resistors and capacitors -> ± percent
#: (F, J, K and M: IEC 60062 via docs/references.md, J and M from memory; B, C, D, G from memory).
TOLERANCE_LETTERS: dict[str, float] = {
    "B": 0.1,
    "C": 0.25,
    "D": 0.5,
    "F": 1.0,
    "G": 2.0,
    "J": 5.0,
    "K": 10.0,
    "M": 20.0,
}

_PM = r"(?:±|\+/-|\+-|\+/−)"
_NUM = r"(?:\d+(?:\.\d*)?|\.\d+)(?:[eE][+-]?\d+)?"
_SYM_RE = re.compile(rf"^\s*{_PM}?\s*({_NUM})\s*(\S*)\s*$")
_PM_START_RE = re.compile(rf"^\s*{_PM}")
_NONFINITE_TOL_RE = re.compile(rf"^\s*(?:{_PM}|\+)?\s*(?:nan|inf(?:inity)?)\b", re.IGNORECASE)
_ASYM_RE = re.compile(rf"^\s*\+\s*({_NUM})\s*(\S*?)\s*/\s*[-−]\s*({_NUM})\s*(\S*)\s*$")


@dataclass(frozen=True)
class Tolerance:
    """A band around a nominal value.

    ``minus`` and ``plus`` are both >= 0; relative ones are fractions (0.05 for 5 %), absolute
    ones are in ``unit``.
    """

    minus: float
    plus: float
    relative: bool
    unit: str = ""

    def bounds(self, nominal: float) -> tuple[float, float]:
        """Lowest and highest value the band allows around ``nominal``."""
        if self.relative:
            return nominal - abs(nominal) * self.minus, nominal + abs(nominal) * self.plus
        return nominal - self.minus, nominal + self.plus

    def relative_to(self, nominal: float) -> tuple[float, float]:
        """(minus, plus) as fractions of ``nominal``."""
        if self.relative:
            return self.minus, self.plus
        if nominal == 0:
            raise QuantityError("an absolute tolerance needs a non-zero nominal to become relative")
        return self.minus / abs(nominal), self.plus / abs(nominal)

    def __str__(self) -> str:
        def num(x: float) -> str:
            return f"{x * 100:g} %" if self.relative else f"{x:g} {self.unit}".strip()

        if self.minus == self.plus:
            return f"±{num(self.plus)}"
        return f"+{num(self.plus)}/-{num(self.minus)}"


def parse_tolerance(text: str | int | float, unit: str | None = None, *, field: str | None = None) -> Tolerance:
    """Read a tolerance.

    Parameters
    ----------
    text : str or number
        ``"±5 %"``, ``"5%"``, ``"+10/-5 %"``, ``"±12 Hz"``, ``"+/-0.1 V"``, an IEC 60062 letter
        (``"J"``), or a bare number (taken as percent).
    unit : str, optional
        The unit of the toleranced value; an absolute tolerance must have it.
    field : str, optional
        Field name put in front of error messages.

    Raises
    ------
    QuantityError
        Unreadable text, a negative width, or an absolute tolerance of the wrong dimension.
    """
    where = f"{field}: " if field else ""
    expected = None if unit is None else canonical_unit(unit)
    if isinstance(text, bool) or not isinstance(text, (str, int, float)):
        raise QuantityError(f"{where}expected a tolerance such as '±5 %', got {text!r}")
    if isinstance(text, (int, float)):
        try:
            pct = finite(float(text), text, where)
        except OverflowError:
            raise NotFiniteError(f"{where}value must be a finite number, got {str(text)[:20]}...") from None
        if pct < 0:
            raise QuantityError(f"{where}a tolerance cannot be negative ({text!r})")
        return Tolerance(pct / 100, pct / 100, True)
    s = text.strip()
    if _NONFINITE_TOL_RE.match(s):
        raise NotFiniteError(f"{where}value must be a finite number, got {text!r}")
    if s in TOLERANCE_LETTERS:
        p = TOLERANCE_LETTERS[s] / 100
        return Tolerance(p, p, True)
    m = _ASYM_RE.match(s)
    if m:
        plus_n, plus_u, minus_n, minus_u = m.groups()
        u = minus_u or plus_u
        if plus_u and minus_u and plus_u != minus_u:
            raise QuantityError(f"{where}tolerance {text!r} mixes units {plus_u!r} and {minus_u!r}")
        if not u:
            raise QuantityError(f"{where}tolerance {text!r} has no unit: write '%' for a relative "
                            "band or the value's unit for an absolute one (e.g. '+10/-5 %')")
        plus = _width(plus_n, u, expected, text, where)
        minus = _width(minus_n, u, expected, text, where)
        return Tolerance(minus[0], plus[0], plus[1], plus[2])
    m = _SYM_RE.match(s)
    if m:
        n, u = m.groups()
        if not u and _PM_START_RE.match(s):
            raise QuantityError(f"{where}tolerance {text!r} is ambiguous without a unit: write "
                            f"'{s} %' for a relative band or '{s} <unit>' for an absolute one")
        w, rel, cu = _width(n, u, expected, text, where)
        return Tolerance(w, w, rel, cu)
    raise QuantityError(f"{where}expected a tolerance such as '±5 %', '+10/-5 %' or '±12 Hz', got {text!r}")


def _width(number: str, unit: str, expected: str | None, text: str, where: str) -> tuple[float, bool, str]:
    if unit in ("", "%"):
        return finite(float(number), text, where) / 100, True, ""
    try:
        q = parse_quantity(f"{number} {unit}", expected)
    except QuantityError as exc:
        msg = str(exc)
        if expected is not None and "expected a" in msg:
            got = parse_quantity(f"{number} {unit}").unit
            msg = (f"an absolute tolerance on a {dimension_name(expected)} needs {expected} "
                   f"or %, got {dimension_name(got)} ({text!r})")
        raise QuantityError(f"{where}{msg}") from None
    if not q.unit:
        return finite(float(number), text, where) / 100, True, ""
    return q.value, False, q.unit


@dataclass(frozen=True)
class Part:
    """A component value with its tolerance band (``6k8 ±5%``)."""

    nominal: float
    tolerance: Tolerance
    unit: str

    @property
    def low(self) -> float:
        return self.tolerance.bounds(self.nominal)[0]

    @property
    def high(self) -> float:
        return self.tolerance.bounds(self.nominal)[1]

    def relative(self) -> tuple[float, float]:
        return self.tolerance.relative_to(self.nominal)


def parse_part(text: str | int | float, unit: str, *, field: str | None = None,
               default_tolerance: str | None = None) -> Part:
    """Read a toleranced component value: ``"6k8 ±5%"``, ``"10 nF 10%"``, ``"16k J"``, ``"100n"``.

    A value without a tolerance gets ``default_tolerance`` (or exactly zero when None).
    """
    where = f"{field}: " if field else ""
    cu = canonical_unit(unit)
    if isinstance(text, bool) or not isinstance(text, (str, int, float)):
        raise QuantityError(f"{where}expected a component value such as '6k8 ±5%', got {text!r}")
    if isinstance(text, (int, float)):
        value_text, tol_text = text, ""
    else:
        value_text, tol_text = _split_part(text, cu)
    q = parse_quantity(value_text, cu, field=field)
    if q.value <= 0:
        raise QuantityError(f"{where}a component value must be positive, got {text!r}")
    if tol_text:
        tol = parse_tolerance(tol_text, cu, field=field)
    elif default_tolerance is not None:
        tol = parse_tolerance(default_tolerance, cu, field=field)
    else:
        tol = Tolerance(0.0, 0.0, True)
    lo, _ = tol.bounds(q.value)
    if lo <= 0:
        raise QuantityError(f"{where}tolerance {tol} would allow a value of zero or less")
    return Part(q.value, tol, cu)


def _split_part(text: str, unit: str) -> tuple[str, str]:
    s = text.strip()
    for i, ch in enumerate(s):
        if ch in "±+" and i > 0:
            return s[:i].strip(), s[i:].strip()
    parts = s.split()
    if len(parts) == 2 and _BARE_NUMBER.match(parts[0]) and parts[1] in TOLERANCE_LETTERS:
        # "47 K", "1 M": with a space, a letter after a bare number is an SI prefix (47 kΩ)
        # or the unit, never silently a tolerance code; "47 J" is neither.
        if parts[1] in PREFIXES or canonical_unit_or_none(parts[1]) == unit:
            return s, ""
        raise QuantityError(f"{s!r}: {parts[1]!r} after a bare number is not an SI prefix; for a "
                        f"tolerance write '{parts[0]} ±{TOLERANCE_LETTERS[parts[1]]:g} %'")
    if len(parts) >= 2:
        last = parts[-1]
        letter = last in TOLERANCE_LETTERS and not (unit == "F" and last == "F")
        if letter or last.endswith("%"):
            # "10 nF 10%" or "16k J"
            if len(parts) >= 3 and parts[-2] in ("±", "+/-"):
                return " ".join(parts[:-2]), "±" + last
            return " ".join(parts[:-1]), last
    # IEC 60062 code with its tolerance letter glued on: "4K7J", "2n2K"
    if len(s) >= 3 and s[-1] in TOLERANCE_LETTERS and _RKM_GLUED.match(s[:-1]):
        return s[:-1], s[-1]
    return s, ""


_RKM_GLUED = re.compile(r"^\d*[RrpnuµμmkKMG]\d+$")
_BARE_NUMBER = re.compile(r"^(?:\d+(?:\.\d*)?|\.\d+)(?:[eE][+-]?\d+)?$")


def canonical_unit_or_none(text: str) -> str | None:
    try:
        return canonical_unit(text)
    except QuantityError:
        return None
