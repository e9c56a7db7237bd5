"""The station file: what is on this bench, instrument by role.

``load_station(path)`` reads the YAML (format in ``docs/stations.md``) into a :class:`Station`;
every problem is reported with its file:line:column, all at once, as :class:`~benchgate.errors.StationErrors`.
"""

from __future__ import annotations

import datetime as _dt
from collections.abc import Mapping
from dataclasses import dataclass, field
from types import MappingProxyType
from typing import Any

from benchgate.common.names import CAPABILITIES

ROLES: tuple[str, ...] = CAPABILITIES  # adc, supply, dmm, counter, digitizer


@dataclass(frozen=True)
class Calibration:
    """Calibration of one instrument (or one ADC channel).

    ``gain`` and ``offset`` correct a reading: ``true = gain * raw + offset`` (offset in volts).
    ``channels`` holds per-channel entries for an ADC (each a Calibration without channels).
    """

    date: _dt.date | None = None
    due: _dt.date | None = None
    gain: float = 1.0
    offset: float = 0.0
    channels: Mapping[str, Calibration] = field(default_factory=dict)

    def __post_init__(self) -> None:
        object.__setattr__(self, "channels", MappingProxyType(dict(self.channels)))

    def _dues(self) -> list[_dt.date | None]:
        if self.channels:
            return [c.due for c in self.channels.values()]
        return [self.due]

    def status(self, today: _dt.date | None = None) -> str:
        """``"valid"``, ``"expired"`` (a due date is before ``today``) or ``"none"`` (no due date).

        For an ADC with per-channel entries the worst channel decides: any expired channel makes
        the whole calibration expired; any channel without a due date makes it "none".
        """
        today = today or _dt.date.today()
        dues = self._dues()
        if any(d is not None and d < today for d in dues):
            return "expired"
        if not dues or any(d is None for d in dues):
            return "none"
        return "valid"

    def for_channel(self, channel: str) -> Calibration:
        """The entry for ``channel`` (identity gain/offset when that channel has none)."""
        if channel in self.channels:
            return self.channels[channel]
        if self.channels:
            return Calibration()
        return self

    def to_dict(self, today: _dt.date | None = None) -> dict[str, Any]:
        out: dict[str, Any] = {
            "date": None if self.date is None else self.date.isoformat(),
            "due": None if self.due is None else self.due.isoformat(),
            "status": self.status(today),
        }
        if self.channels:
            out["channels"] = {k: v.to_dict(today) for k, v in self.channels.items()}
            dues = [c.due for c in self.channels.values() if c.due is not None]
            if dues and out["due"] is None:
                out["due"] = min(dues).isoformat()
        else:
            out["gain"] = self.gain
            out["offset"] = self.offset
        return out


@dataclass(frozen=True)
class InstrumentConfig:
    """One instrument entry of a station file, units already parsed to SI.

    ``address`` is the port path, pyserial URL, ``usb:VID:PID[:SERIAL]`` match, or VISA resource.
    ``options`` holds every other key of the entry (e.g. ``baudrate``, ``channels``, ``bits``,
    ``vref``, ``accuracy``, ``commands``).
    """

    role: str
    kind: str
    address: str
    timeout: float = 1.0
    options: Mapping[str, Any] = field(default_factory=dict)
    calibration: Calibration | None = None
    file: str | None = None  # station file this came from
    line: int | None = None  # line of the entry in that file

    def __post_init__(self) -> None:
        object.__setattr__(self, "options", MappingProxyType(dict(self.options)))

    def option(self, key: str, default: Any = None) -> Any:
        return self.options.get(key, default)


@dataclass(frozen=True)
class Station:
    """A bench: its id, the file it came from, its instruments keyed by role, and the results
    database its runs go to (``results``: a SQLite file or a ``postgresql://`` URL; None: the
    default, unless an option or ``BENCHGATE_DB`` says otherwise)."""

    id: str
    path: str
    instruments: Mapping[str, InstrumentConfig] = field(default_factory=dict)
    results: str | None = None

    def __post_init__(self) -> None:
        object.__setattr__(self, "instruments", MappingProxyType(dict(self.instruments)))

    @property
    def capabilities(self) -> frozenset[str]:
        """The roles this bench can serve (what a plan's ``requires`` is checked against)."""
        return frozenset(self.instruments)


def load_station(path, registry=None) -> Station:
    """Read a station file (format in ``docs/stations.md``).

    ``registry`` (default: the built-in drivers) supplies each driver's own option spec.

    Raises
    ------
    StationErrors
        Every problem found, each with file:line:column.
    """
    from benchgate.instruments._station_load import StationReader

    return StationReader(str(path), registry).read()
