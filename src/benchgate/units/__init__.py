"""Engineering numbers: SI prefixes, IEC 60062 letter-and-digit codes, tolerances, E-series."""

from benchgate.units.format import format_quantity

__all__ = ["format_quantity"]
