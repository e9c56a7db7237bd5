"""The measurement names every part of benchgate agrees on, with their units.

Plans refer to these names, reports print them, and the analysis registry implements each.
"""

from __future__ import annotations

#: name -> unit symbol of the value, in the order reports list them.
MEASUREMENT_UNITS: dict[str, str] = {
    "frequency": "Hz",
    "amplitude": "V",
    "vpp": "V",
    "rms": "V",
    "dc_offset": "V",
    "thd": "%",
    "thd_n": "%",
    "sinad": "dB",
    "snr": "dB",
    "sfdr": "dB",
    "enob": "bits",
    "startup_time": "s",
    "duty_cycle": "%",
    "frequency_drift": "Hz/s",
    "amplitude_dip": "%",
}

MEASUREMENT_NAMES: tuple[str, ...] = tuple(MEASUREMENT_UNITS)

#: one-line descriptions for help texts and reports.
MEASUREMENT_TITLES: dict[str, str] = {
    "frequency": "frequency of the fundamental (four-parameter sine fit)",
    "amplitude": "peak amplitude of the fitted fundamental",
    "vpp": "peak-to-peak voltage",
    "rms": "AC rms voltage (DC removed)",
    "dc_offset": "mean (DC) voltage",
    "thd": "total harmonic distortion, referred to the fundamental",
    "thd_n": "THD plus noise, referred to the fundamental",
    "sinad": "signal to noise and distortion ratio",
    "snr": "signal to noise ratio (harmonics excluded)",
    "sfdr": "spurious-free dynamic range",
    "enob": "effective number of bits",
    "startup_time": "time from capture start to 90 % of steady amplitude",
    "duty_cycle": "high-time duty cycle at the 50 % reference level",
    "frequency_drift": "slope of frequency over the steady part",
    "amplitude_dip": "deepest dip of the envelope below its median after start-up (dropouts)",
}

#: measurements of a two-channel record of one sine stimulus (input reference and output).
RESPONSE_UNITS: dict[str, str] = {
    "gain": "V/V",
    "gain_db": "dB",
    "phase": "deg",
    "input_amplitude": "V",
    "output_amplitude": "V",
    "output_thd": "%",
}

#: measurements over a stepped frequency sweep (f_3db_*, ripple) or a level sweep.
SWEEP_UNITS: dict[str, str] = {
    "f_3db_low": "Hz",
    "f_3db_high": "Hz",
    "passband_gain_db": "dB",
    "ripple": "dB",
    "thd_at_level": "%",
    "clip_level": "V",
}

RESPONSE_TITLES: dict[str, str] = {
    "gain": "voltage gain |Vout/Vin| at the stimulus frequency (three-parameter fits)",
    "gain_db": "voltage gain in dB at the stimulus frequency",
    "phase": "phase of the output relative to the input",
    "input_amplitude": "peak amplitude of the stimulus at the unit's input",
    "output_amplitude": "peak amplitude of the output at the stimulus frequency",
    "output_thd": "THD of the output (harmonics of the stimulus fitted)",
    "f_3db_low": "lower half-power (−3 dB) frequency, interpolated over the sweep",
    "f_3db_high": "upper half-power (−3 dB) frequency, interpolated over the sweep",
    "passband_gain_db": "gain at the sweep's reference frequency",
    "ripple": "pass-band ripple (largest minus smallest gain)",
    "thd_at_level": "output THD at the stated output level",
    "clip_level": "input amplitude at which the output THD reaches the stated limit",
}

#: single readings a `reading` step can take from a dmm, counter or supply -> unit.
READING_UNITS: dict[str, str] = {
    "dc_voltage": "V",
    "ac_voltage": "V",
    "dc_current": "A",
    "frequency": "Hz",
    "supply_voltage": "V",
    "supply_current": "A",
}

#: which instrument roles can take each reading.
READING_SOURCES: dict[str, tuple[str, ...]] = {
    "dc_voltage": ("dmm",),
    "ac_voltage": ("dmm",),
    "dc_current": ("dmm",),
    "frequency": ("counter",),
    "supply_voltage": ("supply",),
    "supply_current": ("supply",),
}

#: instrument roles a station may provide and a plan may `require`.
CAPABILITIES: tuple[str, ...] = ("adc", "supply", "dmm", "counter", "digitizer", "generator")
