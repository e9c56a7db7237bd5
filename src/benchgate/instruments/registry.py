"""Instrument kinds -> driver classes, imported only when a station needs them.

A driver is added by writing one module in ``instruments/`` and one entry here. Each driver
class has ``open(config, *, clock) -> instance``. The table is copied into each
:class:`Registry` instance, so a test can replace an entry on its own registry (or
monkeypatch ``DEFAULT_DRIVERS``) without touching anyone else's.
"""

from __future__ import annotations

import importlib
from collections.abc import Mapping
from typing import Any

from benchgate.errors import InstrumentError

DEFAULT_DRIVERS: Mapping[str, str] = {
    "serial-adc": "benchgate.instruments.serial_adc:SerialAdc",
    "scpi-supply": "benchgate.instruments.scpi_supply:ScpiSupply",
    "scpi-dmm": "benchgate.instruments.scpi_dmm:ScpiDmm",
    "scpi-counter": "benchgate.instruments.scpi_counter:ScpiCounter",
    "scpi-digitizer": "benchgate.instruments.scpi_digitizer:ScpiDigitizer",
    "scpi-generator": "benchgate.instruments.scpi_generator:ScpiGenerator",
}

#: which roles each kind may serve
KIND_ROLES: Mapping[str, str] = {
    "serial-adc": "adc",
    "scpi-supply": "supply",
    "scpi-dmm": "dmm",
    "scpi-counter": "counter",
    "scpi-digitizer": "digitizer",
    "scpi-generator": "generator",
}


class Registry:
    """A kind -> driver table. Values are classes or ``"module:Class"`` strings."""

    def __init__(self, drivers: Mapping[str, Any] | None = None):
        self._drivers: dict[str, Any] = dict(DEFAULT_DRIVERS if drivers is None else drivers)

    def kinds(self) -> tuple[str, ...]:
        return tuple(sorted(self._drivers))

    def register(self, kind: str, driver: Any) -> None:
        self._drivers[kind] = driver

    def driver(self, kind: str, role: str = "?") -> Any:
        """The driver class for ``kind`` (imported now). Raises InstrumentError naming ``role``."""
        try:
            target = self._drivers[kind]
        except KeyError:
            known = ", ".join(self.kinds())
            raise InstrumentError(role, f"unknown instrument kind {kind!r} (known: {known})") from None
        if not isinstance(target, str):
            return target
        module_name, _, cls_name = target.partition(":")
        try:
            module = importlib.import_module(module_name)
        except ModuleNotFoundError as exc:
            raise InstrumentError(role, f"driver for kind {kind!r} is not available ({exc})") from exc
        try:
            return getattr(module, cls_name)
        except AttributeError:
            raise InstrumentError(role, f"driver {target!r} for kind {kind!r} not found") from None

    def open(self, config, *, clock):
        """Open the instrument ``config`` describes with its driver."""
        return self.driver(config.kind, config.role).open(config, clock=clock)
