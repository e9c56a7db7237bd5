"""Argument types for engineering numbers on the command line, read by the units parser."""

from __future__ import annotations

import argparse
from collections.abc import Callable


def positive_quantity(unit: str) -> Callable[[str], float]:
    """An argparse type: a finite value above zero in ``unit`` (``250ms``, ``9 V``, ``50mA``)."""

    def parse(text: str) -> float:
        from benchgate.errors import QuantityError
        from benchgate.units.parse import parse_positive

        try:
            return parse_positive(text, unit)
        except QuantityError as exc:
            raise argparse.ArgumentTypeError(str(exc)) from None

    parse.__name__ = {"s": "duration", "Hz": "rate", "V": "voltage", "A": "current"}.get(unit, unit)
    return parse


def rate(text: str) -> float:
    """An argparse type for sample rates: ``48k``, ``48 kHz``, ``50 kS/s``, ``48000``."""
    from benchgate.errors import QuantityError
    from benchgate.units.parse import parse_rate

    try:
        return parse_rate(text)
    except QuantityError as exc:
        raise argparse.ArgumentTypeError(str(exc)) from None
