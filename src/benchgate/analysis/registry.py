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
from benchgate.analysis.response import (
    ResponseContext,
    Stimulated,
    gain,
    gain_db,
    input_amplitude,
    output_amplitude,
    output_thd,
    phase,
)
from benchgate.analysis.stability import amplitude_dip
from benchgate.analysis.sweep import FrequencySweep, f_3db_high, f_3db_low, passband_gain_db, ripple
from benchgate.analysis.transfer import LevelSweep, clip_level, thd_at_level
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


#: two-channel response measurements: f(record: Stimulated, *, context) -> Measurement.
RESPONSE_MEASUREMENTS: Mapping[str, Callable[..., Measurement]] = MappingProxyType({
    "gain": gain,
    "gain_db": gain_db,
    "phase": phase,
    "input_amplitude": input_amplitude,
    "output_amplitude": output_amplitude,
    "output_thd": output_thd,
})

#: measurements over a frequency sweep (f(FrequencySweep)) or a level sweep (f(LevelSweep)).
FREQUENCY_SWEEP_MEASUREMENTS: Mapping[str, Callable[[FrequencySweep], Measurement]] = MappingProxyType({
    "f_3db_low": f_3db_low,
    "f_3db_high": f_3db_high,
    "passband_gain_db": passband_gain_db,
    "ripple": ripple,
})
LEVEL_SWEEP_MEASUREMENTS: Mapping[str, Callable[[LevelSweep], Measurement]] = MappingProxyType({
    "thd_at_level": thd_at_level,
    "clip_level": clip_level,
})


def measure_response(names: list[str] | tuple[str, ...], record: Stimulated) -> dict[str, Measurement]:
    """Run registered response measurements on one two-channel record (one shared context)."""
    unknown = [n for n in names if n not in RESPONSE_MEASUREMENTS]
    if unknown:
        raise ValueError(f"unknown response measurement(s) {', '.join(map(repr, unknown))}; "
                         f"known: {', '.join(RESPONSE_MEASUREMENTS)}")
    ctx = ResponseContext(record)
    return {n: RESPONSE_MEASUREMENTS[n](record, context=ctx) for n in names}
