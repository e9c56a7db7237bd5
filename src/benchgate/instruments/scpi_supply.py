"""SCPI programmable supply: voltage, current limit, output, read-back (``kind: scpi-supply``).

Closing the driver, or leaving its ``with`` block for any reason, switches the output off
first and checks that it is off.
"""

from __future__ import annotations

from benchgate.analysis.measurement import Measurement
from benchgate.errors import InstrumentError, ScpiQueueError
from benchgate.instruments.scpi_instrument import ScpiInstrument


class ScpiSupply(ScpiInstrument):
    """Implements :class:`benchgate.instruments.base.Supply`."""

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

    def output(self, on: bool) -> None:
        """Switch the output; "off" is sent at once, before earlier queue entries are read.

        When the queue holds entries after "off", the output state is read back and the error
        says whether the output is confirmed off (the entries are still reported).
        """
        command = self.session.command("output", state=bool(on))
        if on:
            self.session.write(command)
            return
        try:
            self.session.write(command, urgent=True)
        except ScpiQueueError as exc:
            try:
                state = "the output is still ON" if self._output_state(check=False) else "the output is confirmed off"
            except InstrumentError:
                state = "the output state could not be read back"
            raise ScpiQueueError(self.name, exc.entries, exc.suspects, note=state) from exc

    def output_state(self) -> bool:
        return self._output_state(check=True)

    def _output_state(self, *, check: bool) -> bool:
        reply = self.session.query(self.session.command("output_state"), check=check).strip().upper()
        if reply in ("1", "ON"):
            return True
        if reply in ("0", "OFF"):
            return False
        raise InstrumentError(self.name, f"output state query returned {reply[:30]!r}, not 0/1")

    def measure_voltage(self) -> Measurement:
        return self.reading("supply_voltage", "measure_voltage", "V")

    def measure_current(self) -> Measurement:
        return self.reading("supply_current", "measure_current", "A")

    def safe_state(self) -> None:
        """Output off, then confirm it is off (the queue is drained, its entries ignored)."""
        command = self.session.command("output", state=False)
        try:
            self.session.write(command, check=False)
            still_on = self._output_state(check=False)
        except InstrumentError as exc:
            raise InstrumentError(self.name, f"could not switch the output off and confirm it "
                                             f"({exc.message}); check the supply by hand") from exc
        if still_on:
            raise InstrumentError(self.name, f"output still ON after {command!r}; check the supply by hand")
        try:
            self.session.read_errors()
        except InstrumentError:
            pass  # the output is confirmed off; an untidy queue does not matter at close
