"""The switched output of a SCPI source (a supply, a signal generator): on, off, read back, safe.

"Off" is sent at once, before earlier queue entries are read; closing the driver switches the
output off and confirms it is off. Shared by :mod:`benchgate.instruments.scpi_supply` and
:mod:`benchgate.instruments.scpi_generator` (templates ``output`` and ``output_state``).
"""

from __future__ import annotations

from typing import Any

from benchgate.errors import InstrumentError, ScpiQueueError


class SwitchedOutput:
    """Mixin for a :class:`~benchgate.instruments.scpi_instrument.ScpiInstrument` with an output."""

    #: what the person at the bench should check by hand when "off" cannot be confirmed
    OUTPUT_NOUN = "instrument"
    name: str
    session: Any

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

    def safe_state(self) -> None:
        """Output off, then confirm it is off (the queue is drained, its entries ignored)."""
        command = self.session.command("output", state=False)
        noun = self.OUTPUT_NOUN
        try:
            self.session.write(command, check=False)
            still_on = self._output_state(check=False)
        except InstrumentError as exc:
            raise InstrumentError(self.name, f"could not switch the output off and confirm it "
                                             f"({exc.message}); check the {noun} by hand") from exc
        if still_on:
            raise InstrumentError(self.name, f"output still ON after {command!r}; check the {noun} by hand")
        try:
            self.session.read_errors()
        except InstrumentError:
            pass  # the output is confirmed off; an untidy queue does not matter at close
