"""The faces of each instrument kind, as the runner sees them, and the facts a bench reports.

A driver implements one of these protocols; the station's registry maps an instrument
``kind`` (``serial-adc``, ``scpi-supply`` …) to the driver class (:class:`DriverClass`: it
opens an instrument and declares its station-file options). Every driver is a context manager;
closing a supply switches its output off first.

The runner calls typed methods only: :func:`take_reading` for a single reading (the plan's
quantity decides which face and which method), ``isinstance(x, Digitizer)`` to tell a
triggered recorder (set up, arm, wait, fetch) from a streaming one, and :class:`InstrumentFacts`
for what it records about each instrument.
"""

from __future__ import annotations

from collections.abc import Callable, Mapping
from typing import TYPE_CHECKING, Any, Protocol, runtime_checkable

import numpy as np

from benchgate.analysis.capture import Capture
from benchgate.analysis.measurement import Measurement
from benchgate.errors import InstrumentError
from benchgate.instruments.facts import InstrumentFacts

if TYPE_CHECKING:
    from benchgate.instruments.options import OptionSpec
    from benchgate.instruments.station import InstrumentConfig

__all__ = ["Adc", "Counter", "Digitizer", "Dmm", "DriverClass", "Generator", "Instrument", "InstrumentFacts",
           "MultiRecorder", "Progress", "READINGS", "Recorder", "Supply", "take_reading"]

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


@runtime_checkable
class Recorder(Instrument, Protocol):
    """Anything that captures a waveform of one channel into a :class:`Capture`."""

    def capture(self, channel: str, *, duration: float, rate: float | None = None,
                progress: Progress | None = None) -> Capture:
        """Record ``duration`` seconds of ``channel`` (volts, calibration applied).

        Raises InstrumentDisconnected (with the partial Capture) if the device goes away,
        CaptureError/InstrumentError if samples were lost beyond the station's threshold.
        """


@runtime_checkable
class Adc(Recorder, Protocol):
    """Serial ADC streamer: the capture starts when samples start arriving."""

    channels: tuple[str, ...]

    def fixture_power(self, on: bool) -> None: ...


@runtime_checkable
class Digitizer(Recorder, Protocol):
    """A triggered recorder: its capture starts when it is armed.

    ``capture`` does everything; ``setup``, ``arm``, ``wait``, ``fetch`` and ``to_capture`` are
    the same steps one at a time, so a runner can switch a supply on between ``arm`` and
    ``wait`` and have the start-up in the capture.
    """

    def setup(self, channel: str, *, duration: float, rate: float | None = None,
              range: float | None = None) -> dict[str, Any]: ...
    def arm(self) -> None: ...
    def wait(self) -> None: ...
    def fetch(self) -> np.ndarray: ...
    def to_capture(self, samples: np.ndarray) -> Capture: ...


@runtime_checkable
class Supply(Instrument, Protocol):
    def set_voltage(self, volts: float) -> None: ...
    def set_current_limit(self, amps: float) -> None: ...
    def output(self, on: bool) -> None: ...
    def output_state(self) -> bool: ...
    def measure_voltage(self) -> Measurement: ...  # name "supply_voltage"
    def measure_current(self) -> Measurement: ...  # name "supply_current"


@runtime_checkable
class Generator(Instrument, Protocol):
    """A signal generator: one output, switched off on every fault like a supply."""

    def set_waveform(self, waveform: str) -> None: ...  # "sine", "square", "triangle"
    def set_frequency(self, hz: float) -> None: ...
    def set_amplitude(self, value: float, unit: str = "Vpp") -> None: ...  # Vpp, Vrms or Vpk
    def set_offset(self, volts: float) -> None: ...
    def set_load(self, ohms: float | None) -> None: ...  # None: high impedance
    def output(self, on: bool) -> None: ...
    def output_state(self) -> bool: ...


@runtime_checkable
class MultiRecorder(Recorder, Protocol):
    """A recorder that samples several channels at the same instants (two-channel response)."""

    def capture_channels(self, channels: tuple[str, ...], *, duration: float, rate: float | None = None,
                         progress: Progress | None = None) -> tuple[Capture, ...]:
        """Record ``channels`` together: one Capture each, same rate, length and start time."""


@runtime_checkable
class Dmm(Instrument, Protocol):
    def measure_dc_voltage(self) -> Measurement: ...  # "dc_voltage"
    def measure_ac_voltage(self) -> Measurement: ...  # "ac_voltage"
    def measure_dc_current(self) -> Measurement: ...  # "dc_current"


@runtime_checkable
class Counter(Instrument, Protocol):
    def measure_frequency(self) -> Measurement: ...  # "frequency"


class DriverClass(Protocol):
    """What the registry needs of a driver class."""

    @classmethod
    def open(cls, config: InstrumentConfig, *, clock: Any = None) -> Instrument: ...

    @classmethod
    def station_options(cls) -> Mapping[str, OptionSpec]:
        """Every option key the driver accepts in a station entry (besides the address,
        ``timeout`` and ``calibration``), with its type."""

    @classmethod
    def check_options(cls, options: Mapping[str, Any]) -> list[tuple[tuple[str, ...], str]]:
        """Problems with option values: (key path, message) pairs; empty when all is well.

        The loader has already read each value as its spec says; this checks the rest (keys
        that depend on each other, command templates, accuracy tables …)."""

    @classmethod
    def complete_options(cls, options: Mapping[str, Any]) -> dict[str, Any]:
        """The options with the driver's defaults filled in (what ``InstrumentConfig`` holds)."""


# ----------------------------------------------------------------------------- readings
def _dmm_dc_voltage(dmm: Dmm) -> Measurement:
    return dmm.measure_dc_voltage()


def _dmm_ac_voltage(dmm: Dmm) -> Measurement:
    return dmm.measure_ac_voltage()


def _dmm_dc_current(dmm: Dmm) -> Measurement:
    return dmm.measure_dc_current()


def _counter_frequency(counter: Counter) -> Measurement:
    return counter.measure_frequency()


def _supply_voltage(supply: Supply) -> Measurement:
    return supply.measure_voltage()


def _supply_current(supply: Supply) -> Measurement:
    return supply.measure_current()


#: reading quantity -> (the face that takes it, the typed call that takes it)
READINGS: Mapping[str, tuple[type, Callable[[Any], Measurement]]] = {
    "dc_voltage": (Dmm, _dmm_dc_voltage),
    "ac_voltage": (Dmm, _dmm_ac_voltage),
    "dc_current": (Dmm, _dmm_dc_current),
    "frequency": (Counter, _counter_frequency),
    "supply_voltage": (Supply, _supply_voltage),
    "supply_current": (Supply, _supply_current),
}


def take_reading(instrument: Instrument, quantity: str) -> Measurement:
    """Take reading ``quantity`` (a plan's ``reading`` step) from ``instrument``.

    Raises InstrumentError naming the instrument when it cannot take that reading.
    """
    try:
        face, call = READINGS[quantity]
    except KeyError:
        raise InstrumentError(instrument.name, f"no reading called {quantity!r} "
                                               f"(readings: {', '.join(READINGS)})") from None
    if not isinstance(instrument, face):
        raise InstrumentError(instrument.name, f"a {face.__name__.lower()} reading ({quantity}) cannot be "
                                               f"taken by this instrument")
    return call(instrument)
