"""The faces of each instrument kind, as the runner sees them.

A driver implements one of these protocols; the station's registry maps an instrument
``kind`` (``serial-adc``, ``scpi-supply`` …) to the driver class. Every driver is a context
manager; closing a supply switches its output off first.
"""

from __future__ import annotations

from collections.abc import Callable
from typing import Protocol, runtime_checkable

from benchgate.analysis.capture import Capture
from benchgate.analysis.measurement import Measurement

#: progress callback for long operations: (fraction done 0..1, text)
Progress = Callable[[float, str], None]


@runtime_checkable
class Instrument(Protocol):
    name: str  # the role in the station file, used in every error message
    address: str  # port path / URL / VISA resource, as opened

    @property
    def identity(self) -> str | None:
        """What the instrument said it is (``*IDN?`` or the ADC's identify reply)."""

    def close(self) -> None: ...


class Adc(Instrument, Protocol):
    """Serial ADC streamer."""

    channels: tuple[str, ...]

    def capture(self, channel: str, *, duration: float, rate: float | None = None,
                progress: Progress | None = None) -> Capture:
        """Record ``duration`` seconds of ``channel`` (volts, calibration applied).

        Raises InstrumentDisconnected (with the partial Capture) if the device goes away,
        CaptureError/InstrumentError if frames were lost beyond the station's threshold.
        """

    def fixture_power(self, on: bool) -> None: ...


class Supply(Instrument, Protocol):
    def set_voltage(self, volts: float) -> None: ...
    def set_current_limit(self, amps: float) -> None: ...
    def output(self, on: bool) -> None: ...
    def output_state(self) -> bool: ...
    def measure_voltage(self) -> Measurement: ...  # name "supply_voltage"
    def measure_current(self) -> Measurement: ...  # name "supply_current"


class Dmm(Instrument, Protocol):
    def measure_dc_voltage(self) -> Measurement: ...  # "dc_voltage"
    def measure_ac_voltage(self) -> Measurement: ...  # "ac_voltage"
    def measure_dc_current(self) -> Measurement: ...  # "dc_current"


class Counter(Instrument, Protocol):
    def measure_frequency(self) -> Measurement: ...  # "frequency"


class Digitizer(Instrument, Protocol):
    def capture(self, channel: str, *, duration: float, rate: float | None = None,
                progress: Progress | None = None) -> Capture: ...
