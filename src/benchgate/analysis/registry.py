"""Measurement name -> function. Adding a measurement: write one function, add one entry here
(and its name and unit in :mod:`benchgate.common.names`)."""

from __future__ import annotations

from collections.abc import Callable, Mapping
from types import MappingProxyType

from benchgate.analysis.capture import Capture
from benchgate.analysis.context import Context
from benchgate.analysis.distortion import enob, sfdr, sinad, snr, thd, thd_n
from benchgate.analysis.drift import frequency_drift
from benchgate.analysis.frequency import frequency
from benchgate.analysis.levels import amplitude, dc_offset, rms, vpp
from benchgate.analysis.measurement import Measurement
from benchgate.analysis.pulse import duty_cycle
from benchgate.analysis.stability import amplitude_dip
from benchgate.analysis.transient import startup_time

MeasurementFunction = Callable[..., Measurement]  # f(capture, *, context) -> Measurement

MEASUREMENTS: Mapping[str, MeasurementFunction] = MappingProxyType({
    "frequency": frequency,
    "amplitude": amplitude,
    "vpp": vpp,
    "rms": rms,
    "dc_offset": dc_offset,
    "thd": thd,
    "thd_n": thd_n,
    "sinad": sinad,
    "snr": snr,
    "sfdr": sfdr,
    "enob": enob,
    "startup_time": startup_time,
    "duty_cycle": duty_cycle,
    "frequency_drift": frequency_drift,
    "amplitude_dip": amplitude_dip,
})


def measure(name: str, capture: Capture, context: Context) -> Measurement:
    """Run one registered measurement; unknown names raise ValueError naming the known ones."""
    try:
        func = MEASUREMENTS[name]
    except KeyError:
        raise ValueError(f"unknown measurement {name!r}; known: {', '.join(MEASUREMENTS)}") from None
    return func(capture, context=context)
