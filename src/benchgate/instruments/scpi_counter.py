"""SCPI frequency counter (``kind: scpi-counter``)."""

from __future__ import annotations

from benchgate.analysis.measurement import Measurement
from benchgate.instruments.scpi_instrument import ScpiInstrument


class ScpiCounter(ScpiInstrument):
    """Implements :class:`benchgate.instruments.base.Counter`."""

    DEFAULT_COMMANDS = {"measure_frequency": "MEAS:FREQ?"}

    def measure_frequency(self) -> Measurement:
        return self.reading("frequency", "measure_frequency", "Hz")
