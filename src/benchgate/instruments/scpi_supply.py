"""SCPI programmable supply: voltage, current limit, output, read-back (``kind: scpi-supply``).

Closing the driver, or leaving its ``with`` block for any reason, switches the output off
first and checks that it is off.
"""

from __future__ import annotations

from benchgate.analysis.measurement import Measurement
from benchgate.instruments.scpi_instrument import ScpiInstrument
from benchgate.instruments.scpi_output import SwitchedOutput


class ScpiSupply(SwitchedOutput, ScpiInstrument):
    """Implements :class:`benchgate.instruments.base.Supply` (output switching: :class:`SwitchedOutput`)."""

    OUTPUT_NOUN = "supply"

    DEFAULT_COMMANDS = {
        "set_voltage": "SOUR:VOLT {value}",
        "set_current_limit": "SOUR:CURR {value}",
        "output": "OUTP {state}",
        "output_state": "OUTP?",
        "measure_voltage": "MEAS:VOLT?",
        "measure_current": "MEAS:CURR?",
    }

    def set_voltage(self, volts: float) -> None:
        self.configure("set_voltage", value=float(volts))

    def set_current_limit(self, amps: float) -> None:
        self.configure("set_current_limit", value=float(amps))

    def measure_voltage(self) -> Measurement:
        return self.reading("supply_voltage", "measure_voltage", "V")

    def measure_current(self) -> Measurement:
        return self.reading("supply_current", "measure_current", "A")
