"""A minimal stand-in for ``benchgate.instruments.open_station``, used only while that is absent.

Opens the station's instruments (the roles asked for) through the driver registry; leaving the
context switches the supply output off first (even when other closes fail), then closes all.
"""

from __future__ import annotations

from typing import Any

from benchgate.record import InstrumentRecord


class FallbackBench:
    def __init__(self, station: Any, *, clock: Any = None, roles: Any = None):
        self.station = station
        self.clock = clock
        self.roles = sorted(roles) if roles is not None else sorted(station.instruments)
        self.instruments: dict[str, Any] = {}

    def __enter__(self) -> FallbackBench:
        from benchgate.instruments.registry import Registry

        registry = Registry()
        try:
            # the supply first, so that it is known (and can be switched off) if a later open fails
            for role in sorted(self.roles, key=lambda r: r != "supply"):
                self.instruments[role] = registry.open(self.station.instruments[role], clock=self.clock)
        except BaseException:
            self.__exit__(None, None, None)
            raise
        return self

    def __getitem__(self, role: str) -> Any:
        return self.instruments[role]

    def get(self, role: str, default: Any = None) -> Any:
        return self.instruments.get(role, default)

    @property
    def supply(self) -> Any:
        return self.instruments["supply"]

    def records(self) -> list[InstrumentRecord]:
        out = []
        for role, inst in self.instruments.items():
            config = self.station.instruments[role]
            cal = None if config.calibration is None else config.calibration.to_dict()
            out.append(InstrumentRecord(role=role, address=config.address,
                                        identity=getattr(inst, "identity", None), calibration=cal))
        return out

    def __exit__(self, *exc: Any) -> bool:
        supply = self.instruments.get("supply")
        if supply is not None:
            try:
                supply.output(False)
            except Exception:
                pass
        for inst in self.instruments.values():
            try:
                inst.close()
            except Exception:
                pass
        return False


def open_station(station: Any, *, clock: Any = None, roles: Any = None) -> FallbackBench:
    return FallbackBench(station, clock=clock, roles=roles)
