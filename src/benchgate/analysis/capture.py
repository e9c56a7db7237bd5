"""The capture every measurement works on: :class:`Capture`, with its optional :class:`AdcInfo`."""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, field
from types import MappingProxyType
from typing import Any

import numpy as np


@dataclass(frozen=True)
class AdcInfo:
    """What is known about the converter that made a capture.

    Parameters
    ----------
    bits : int
        Resolution in bits (1 to 32).
    vref : float
        Reference voltage in volts. With ``bipolar=False`` the input range is 0 … vref;
        with ``bipolar=True`` it is −vref … +vref.
    bipolar : bool
        Whether the converter's range is symmetric about zero.
    """

    bits: int
    vref: float
    bipolar: bool = False

    def __post_init__(self) -> None:
        if not isinstance(self.bits, (int, np.integer)) or not 1 <= int(self.bits) <= 32:
            raise ValueError(f"ADC bits must be an integer from 1 to 32, got {self.bits!r}")
        if not np.isfinite(self.vref) or self.vref <= 0:
            raise ValueError(f"ADC reference voltage must be a positive number of volts, got {self.vref!r}")

    @property
    def full_scale(self) -> float:
        """Full-scale range (FSR) in volts."""
        return 2.0 * self.vref if self.bipolar else float(self.vref)

    @property
    def lsb(self) -> float:
        """One code step (Q) in volts: FSR / 2**bits."""
        return self.full_scale / float(2 ** int(self.bits))

    @property
    def low_rail(self) -> float:
        return -float(self.vref) if self.bipolar else 0.0

    @property
    def high_rail(self) -> float:
        """The largest voltage the converter can report (one LSB below the top of its range)."""
        return self.low_rail + self.full_scale - self.lsb

    def to_dict(self) -> dict[str, Any]:
        return {"bits": int(self.bits), "vref": float(self.vref), "bipolar": bool(self.bipolar)}

    @classmethod
    def from_dict(cls, d: Mapping[str, Any]) -> AdcInfo:
        return cls(bits=int(d["bits"]), vref=float(d["vref"]), bipolar=bool(d.get("bipolar", False)))


def _frozen_array(values: Any) -> np.ndarray:
    arr = np.array(values, dtype=np.float64, copy=True)
    if arr.ndim != 1:
        raise ValueError(f"capture samples must be a 1-D array, got shape {arr.shape}")
    arr.setflags(write=False)
    return arr


@dataclass(frozen=True, eq=False)
class Capture:
    """One channel of sampled voltage.

    Parameters
    ----------
    samples : array_like
        Samples in volts; stored as a read-only float64 copy. NaN or infinite values are kept
        as they are (measurements refuse them with a reason), never silently dropped.
    sample_rate : float
        Sample rate in Hz (> 0).
    start_time : float
        Time of the first sample in seconds (relative to whatever the source calls zero,
        e.g. the start of acquisition).
    channel : str
        Channel name.
    adc : AdcInfo or None
        The converter, when known: gives full-scale range, LSB and rails.
    clock_ppm : float or None
        Sample-clock tolerance in parts per million (a rectangular bound), when known.
    metadata : mapping
        Source description: file, instrument identity, calibration, loss counts … (JSON-able).
    """

    samples: np.ndarray
    sample_rate: float
    start_time: float = 0.0
    channel: str = "ch0"
    adc: AdcInfo | None = None
    clock_ppm: float | None = None
    metadata: Mapping[str, Any] = field(default_factory=dict)

    def __post_init__(self) -> None:
        object.__setattr__(self, "samples", _frozen_array(self.samples))
        rate = float(self.sample_rate)
        if not np.isfinite(rate) or rate <= 0:
            raise ValueError(f"sample rate must be a positive number of Hz, got {self.sample_rate!r}")
        object.__setattr__(self, "sample_rate", rate)
        object.__setattr__(self, "start_time", float(self.start_time))
        if self.clock_ppm is not None:
            ppm = float(self.clock_ppm)
            if not np.isfinite(ppm) or ppm < 0:
                raise ValueError(f"clock tolerance must be a non-negative number of ppm, got {self.clock_ppm!r}")
            object.__setattr__(self, "clock_ppm", ppm)
        object.__setattr__(self, "metadata", MappingProxyType(dict(self.metadata)))

    @property
    def n(self) -> int:
        """Number of samples."""
        return int(self.samples.size)

    @property
    def duration(self) -> float:
        """Capture length in seconds (n / sample_rate)."""
        return self.n / self.sample_rate

    @property
    def dt(self) -> float:
        """Sample period in seconds."""
        return 1.0 / self.sample_rate

    def times(self) -> np.ndarray:
        """Sample instants in seconds, starting at ``start_time``."""
        return self.start_time + np.arange(self.n) / self.sample_rate

    def slice(self, start: int, stop: int | None = None) -> Capture:
        """A new capture holding samples ``start:stop``, with its start time moved to match."""
        stop = self.n if stop is None else stop
        start = max(0, int(start))
        return Capture(
            samples=self.samples[start:stop],
            sample_rate=self.sample_rate,
            start_time=self.start_time + start / self.sample_rate,
            channel=self.channel,
            adc=self.adc,
            clock_ppm=self.clock_ppm,
            metadata=self.metadata,
        )

    def with_metadata(self, **extra: Any) -> Capture:
        """A copy with ``extra`` merged into its metadata."""
        merged = dict(self.metadata)
        merged.update(extra)
        return Capture(self.samples, self.sample_rate, self.start_time, self.channel,
                       self.adc, self.clock_ppm, merged)
