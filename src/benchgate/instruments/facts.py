"""What a bench reports about each open instrument (plain facts; the runner builds its record)."""

from __future__ import annotations

from dataclasses import dataclass
from typing import TYPE_CHECKING

if TYPE_CHECKING:
    from benchgate.instruments.station import Calibration


@dataclass(frozen=True)
class InstrumentFacts:
    """One open instrument: its role and kind in the station, address, identity, calibration."""

    role: str
    kind: str
    address: str
    identity: str | None
    calibration: Calibration | None
