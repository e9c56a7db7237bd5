"""Instruments: the station file, drivers behind a registry, and an open bench.

``load_station(path)`` reads a station file; ``open_station(station)`` opens its instruments
as a :class:`Bench` whose exit always leaves the bench safe: the supply's output is switched
off first (even when the block raised, even when other instruments fail to close), then
everything else is closed.
"""

from __future__ import annotations

from collections.abc import Iterable
from typing import TYPE_CHECKING, Any

from benchgate.errors import BenchgateError, InstrumentError
from benchgate.instruments.facts import InstrumentFacts

if TYPE_CHECKING:
    from benchgate.instruments.base import Instrument, Recorder, Supply
    from benchgate.instruments.station import Station

__all__ = ["Bench", "InstrumentFacts", "load_station", "open_station"]

#: the supply and the generator are opened first (and switched off at once), so a later failure
#: finds them safe
_OPEN_ORDER = ("supply", "generator", "adc", "dmm", "counter", "digitizer")
#: roles with an output that the safe state switches off, in that order
SWITCHED_OUTPUTS = ("supply", "generator")


def load_station(path, registry=None):
    """Read a station file (see ``docs/stations.md``); raises StationErrors with positions."""
    from benchgate.instruments.station import load_station as _load

    return _load(path, registry)


class Bench:
    """The open instruments of one station, by role. Use as a context manager."""

    def __init__(self, station: Station, instruments: dict[str, Instrument]):
        self.station = station
        self._instruments = dict(instruments)
        self.close_errors: list[BaseException] = []
        self._closed = False

    def __getitem__(self, role: str) -> Any:
        try:
            return self._instruments[role]
        except KeyError:
            have = ", ".join(self._instruments) or "none"
            raise InstrumentError(role, f"station {self.station.id!r} has no open {role!r} "
                                        f"(open: {have})") from None

    def __contains__(self, role: str) -> bool:
        return role in self._instruments

    def get(self, role: str, default: Any = None) -> Any:
        return self._instruments.get(role, default)

    def require_supply(self) -> Supply:
        """The open supply, typed; InstrumentError when the bench has none (or it is no supply)."""
        from benchgate.instruments.base import Supply

        inst = self["supply"]
        if not isinstance(inst, Supply):
            raise InstrumentError("supply", f"the supply of station {self.station.id!r} is not a supply "
                                            f"(it is a {type(inst).__name__})")
        return inst

    def recorder(self, role: str) -> Recorder:
        """The instrument open as ``role``, checked to capture waveforms (an ADC or a digitizer)."""
        from benchgate.instruments.base import Recorder

        inst = self[role]
        if not isinstance(inst, Recorder):
            raise InstrumentError(role, f"the {role} of station {self.station.id!r} cannot capture a "
                                        f"waveform (it is a {type(inst).__name__})")
        return inst

    @property
    def roles(self) -> tuple[str, ...]:
        return tuple(self._instruments)

    @property
    def supply(self) -> Supply | None:
        return self._instruments.get("supply")  # type: ignore[return-value]  # the supply role

    def facts(self) -> list[InstrumentFacts]:
        """Role, kind, address, identity and calibration of each open instrument, in open order."""
        out = []
        for role, inst in self._instruments.items():
            cfg = self.station.instruments.get(role)
            out.append(InstrumentFacts(role=role, kind=cfg.kind if cfg else "",
                                       address=getattr(inst, "address", None) or (cfg.address if cfg else ""),
                                       identity=inst.identity,
                                       calibration=cfg.calibration if cfg is not None else None))
        return out

    def safe(self) -> None:
        """Switch the supply and generator outputs off now (each is tried); raises the first error."""
        errors: list[BaseException] = []
        for role in SWITCHED_OUTPUTS:
            inst = self._instruments.get(role)
            if inst is None:
                continue
            try:
                inst.output(False)
            except BaseException as exc:  # noqa: BLE001 - the next output must still be switched off
                errors.append(exc)
        if errors:
            raise errors[0]

    def close(self) -> None:
        """Supply and generator outputs off first, then close everything; errors are collected,
        the first re-raised."""
        if self._closed:
            return
        self._closed = True
        errors: list[BaseException] = []
        try:
            self.safe()
        except BaseException as exc:  # noqa: BLE001 - the other instruments must still close
            errors.append(exc)
        order = sorted(self._instruments, key=lambda r: _OPEN_ORDER.index(r) if r in _OPEN_ORDER else 99)
        for role in order:
            try:
                self._instruments[role].close()
            except BaseException as exc:  # noqa: BLE001
                errors.append(exc)
        self.close_errors = errors
        if errors:
            raise errors[0]

    def __enter__(self) -> Bench:
        return self

    def __exit__(self, exc_type, exc, tb) -> None:
        try:
            self.close()
        except BaseException:
            if exc is None:
                raise
            # the block's own error is the one to report; close errors stay in close_errors


def open_station(station, *, clock=None, roles: Iterable[str] | None = None, registry=None) -> Bench:
    """Open the station's instruments (all, or only ``roles``) and return a :class:`Bench`.

    The supply (when opened) has its output switched off right after it opens. If any
    instrument fails to open, those already open are closed (supply off first) and the
    error is raised.
    """
    from benchgate.clock import SystemClock
    from benchgate.instruments.registry import Registry

    clock = clock or SystemClock()
    registry = registry or Registry()
    wanted = list(station.instruments) if roles is None else list(dict.fromkeys(roles))
    for role in wanted:
        if role not in station.instruments:
            have = ", ".join(station.instruments) or "none"
            raise InstrumentError(role, f"station {station.id!r} ({station.path}) has no {role!r} "
                                        f"(it has: {have})")
    wanted.sort(key=lambda r: _OPEN_ORDER.index(r) if r in _OPEN_ORDER else 99)
    opened: dict[str, Any] = {}
    bench = Bench(station, opened)
    try:
        for role in wanted:
            inst = registry.open(station.instruments[role], clock=clock)
            opened[role] = inst
            bench._instruments[role] = inst
            if role in SWITCHED_OUTPUTS:
                inst.output(False)
    except BaseException as exc:
        try:
            bench.close()
        except BaseException:  # noqa: BLE001 - report the open failure, not the cleanup
            pass
        if isinstance(exc, BenchgateError) or not isinstance(exc, Exception):
            raise
        raise InstrumentError(role, f"cannot open: {type(exc).__name__}: {exc}") from exc
    return bench
