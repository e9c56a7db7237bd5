"""The seams between the simulated world (boards, virtual ADC) and the simulated ports.

The pseudo-terminal ADC device (``sim.serial_device``) asks a :class:`SampleSource` for ADC
codes; the loopback SCPI server (``sim.scpi_server``) asks a :class:`ScpiBackend` what its
emulated supply, DMM, counter and digitizer would see. ``sim.bench.UnderstudyBench`` wires the
board simulation to both. Each server also has a small stand-alone implementation for its own
tests.
"""

from __future__ import annotations

from typing import Protocol

import numpy as np


class SampleSource(Protocol):
    """A stream of ADC codes, continuous in (virtual) time."""

    bits: int  # code width; codes are 0 .. 2**bits - 1
    channels: tuple[str, ...]  # channel names; bit i of a channel mask selects channels[i]

    def start(self, rate: float, channel_mask: int) -> None:
        """Acquisition begins now (at the bench clock's current time) at ``rate`` Hz."""

    def read(self, n: int) -> np.ndarray:
        """The next ``n`` samples since ``start`` (or the previous read), as uint16 codes of
        shape (n, number of selected channels)."""

    def stop(self) -> None: ...

    def fixture_power(self, on: bool) -> None:
        """The ADC board's own fixture-power switch (e.g. a relay powering the unit)."""


class ScpiBackend(Protocol):
    """What the emulated SCPI instruments measure in the simulated world. Values in SI units."""

    def supply_changed(self, voltage: float, current_limit: float, output: bool) -> None:
        """The emulated supply's settings changed (output True = on)."""

    def supply_current(self) -> float:
        """Current the unit draws now, in A (already limited by the current limit)."""

    def supply_voltage(self) -> float:
        """Voltage at the supply terminals now, in V (sags in current limit)."""

    def dmm_dc_voltage(self) -> float: ...

    def dmm_ac_voltage(self) -> float: ...

    def dmm_dc_current(self) -> float: ...

    def counter_frequency(self) -> float:
        """Frequency of the unit's output in Hz (0.0 when it does not oscillate)."""

    def digitizer_record(self, rate: float, points: int) -> np.ndarray:
        """``points`` samples of the unit's output at ``rate`` Hz, in volts, starting now."""

    # Optional (a backend without them has no generator input / one digitizer channel):
    # ``generator_changed(settings: dict)`` — the emulated generator's waveform, frequency, vpp,
    # offset, load and output changed; ``digitizer_channels_at(start, rate, points, channels)`` —
    # ``points`` samples of each named channel at the same instants, shape (points, channels).
