"""SCPI digital multimeter: DC and AC voltage, DC current (``kind: scpi-dmm``)."""

from __future__ import annotations

from benchgate.analysis.measurement import Measurement
from benchgate.instruments.scpi_instrument import ScpiInstrument


class ScpiDmm(ScpiInstrument):
    """Implements :class:`benchgate.instruments.base.Dmm`."""

    DEFAULT_COMMANDS = {
        "measure_dc_voltage": "MEAS:VOLT:DC?",
        "measure_ac_voltage": "MEAS:VOLT:AC?",
        "measure_dc_current": "MEAS:CURR:DC?",
    }

    def measure_dc_voltage(self) -> Measurement:
        return self.reading("dc_voltage", "measure_dc_voltage", "V")

    def measure_ac_voltage(self) -> Measurement:
        return self.reading("ac_voltage", "measure_ac_voltage", "V")

    def measure_dc_current(self) -> Measurement:
        return self.reading("dc_current", "measure_dc_current", "A")
