"""Engineering numbers: SI prefixes, IEC 60062 letter-and-digit codes, tolerances, E-series."""

from benchgate.units.eseries import is_preferred, nearest_preferred, series, series_for_tolerance
from benchgate.units.format import format_quantity
from benchgate.units.parse import Quantity, parse_quantity, parse_value
from benchgate.units.tolerance import Part, Tolerance, parse_part, parse_tolerance

__all__ = [
    "Part",
    "Quantity",
    "Tolerance",
    "format_quantity",
    "is_preferred",
    "nearest_preferred",
    "parse_part",
    "parse_quantity",
    "parse_tolerance",
    "parse_value",
    "series",
    "series_for_tolerance",
]
