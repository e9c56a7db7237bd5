"""SCPI signal generator: waveform, frequency, amplitude, offset, output load, output on/off
(``kind: scpi-generator``).

Every setting is checked against the station's limits before it is sent (a setting out of
range is refused with the instrument's name, never clamped), then the error queue is read as
for every SCPI driver. Closing the driver, or leaving its ``with`` block for any reason,
switches the output off first and confirms it is off. Station options: ``max_amplitude`` (the
largest peak-to-peak voltage a plan may ask for, V; protects the unit's input),
``max_frequency`` (Hz), ``load`` (the output load setting: ``high`` or a resistance in Ω).
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from typing import Any

from benchgate.errors import InstrumentError
from benchgate.instruments.options import OptionSpec
from benchgate.instruments.scpi import station_error
from benchgate.instruments.scpi_instrument import ScpiInstrument
from benchgate.instruments.scpi_output import SwitchedOutput

#: waveform names a plan may ask for -> the SCPI function mnemonic
WAVEFORMS = {"sine": "SIN", "square": "SQU", "triangle": "TRI"}
#: amplitude units a plan may use; the generator is set in Vpp (sine: Vpp = 2·√2·Vrms)
AMPLITUDE_UNITS = ("Vpp", "Vrms", "Vpk")


def to_vpp(value: float, unit: str, waveform: str = "sine") -> float:
    """A sine's (or square's, triangle's) amplitude in volts peak-to-peak.

    Vrms → Vpp uses the waveform's crest factor: sine √2, square 1, triangle √3 (from the
    waveforms' definitions); Vpk is half the peak-to-peak value.
    """
    if unit == "Vpp":
        return float(value)
    if unit == "Vpk":
        return 2.0 * float(value)
    if unit == "Vrms":
        crest = {"sine": math.sqrt(2.0), "square": 1.0, "triangle": math.sqrt(3.0)}[waveform]
        return 2.0 * crest * float(value)
    raise ValueError(f"unknown amplitude unit {unit!r} ({', '.join(AMPLITUDE_UNITS)})")


class ScpiGenerator(SwitchedOutput, ScpiInstrument):
    """Implements :class:`benchgate.instruments.base.Generator`."""

    OUTPUT_NOUN = "generator"

    DEFAULT_COMMANDS = {
        "set_function": "SOUR:FUNC {shape}",
        "set_frequency": "SOUR:FREQ {value}",
        "set_amplitude": "SOUR:VOLT {value}",
        "amplitude_unit": "SOUR:VOLT:UNIT VPP",
        "set_offset": "SOUR:VOLT:OFFS {value}",
        "set_load": "OUTP:LOAD {value}",
        "output": "OUTP {state}",
        "output_state": "OUTP?",
    }
    OPTIONS = {
        "max_amplitude": OptionSpec("quantity", "largest amplitude a plan may set (Vpp)", unit="V",
                                    positive=True, maximum=1000.0),
        "max_frequency": OptionSpec("quantity", "highest frequency a plan may set", unit="Hz",
                                    positive=True, maximum=1e10),
        "load": OptionSpec("text", "output load setting: 'high' or a resistance in Ω (e.g. '50')"),
    }

    def __init__(self, config, session, *, clock=None):
        super().__init__(config, session, clock=clock)
        self.settings: dict[str, Any] = {}
        load = config.option("load")
        if load is not None:
            ohms, problem = load_setting(load)
            if problem:
                raise station_error(config, problem)
            self.set_load(ohms)

    @classmethod
    def check_options(cls, options: Mapping[str, Any]) -> list[tuple[tuple[str, ...], str]]:
        problems = super().check_options(options)
        if "load" in options:
            problem = load_setting(options["load"])[1]
            if problem:
                problems.append((("load",), problem))
        return problems

    # ------------------------------------------------------------------ settings
    def set_waveform(self, waveform: str) -> None:
        if waveform not in WAVEFORMS:
            raise InstrumentError(self.name, f"unknown waveform {waveform!r} ({', '.join(WAVEFORMS)})")
        self.configure("set_function", shape=WAVEFORMS[waveform])
        self.settings["waveform"] = waveform

    def set_frequency(self, hz: float) -> None:
        hz = float(hz)
        top = self.config.option("max_frequency")
        if not (math.isfinite(hz) and hz > 0):
            raise InstrumentError(self.name, f"frequency must be > 0 Hz, got {hz!r}")
        if top is not None and hz > float(top):
            raise InstrumentError(self.name, f"frequency {hz:g} Hz is above the station's max_frequency {top:g} Hz")
        self.configure("set_frequency", value=hz)
        self.settings["frequency"] = hz

    def set_amplitude(self, value: float, unit: str = "Vpp") -> None:
        """Set the amplitude; ``unit`` is Vpp, Vrms or Vpk (converted to Vpp for the waveform set)."""
        vpp = to_vpp(value, unit, self.settings.get("waveform", "sine"))
        top = self.config.option("max_amplitude")
        if not (math.isfinite(vpp) and vpp >= 0):
            raise InstrumentError(self.name, f"amplitude must be >= 0, got {value!r} {unit}")
        if top is not None and vpp > float(top):
            raise InstrumentError(self.name, f"amplitude {vpp:g} Vpp is above the station's max_amplitude "
                                             f"{float(top):g} Vpp (the unit's input is protected)")
        self.configure("amplitude_unit")
        self.configure("set_amplitude", value=vpp)
        self.settings["amplitude_vpp"] = vpp

    def set_offset(self, volts: float) -> None:
        volts = float(volts)
        if not math.isfinite(volts):
            raise InstrumentError(self.name, f"offset must be a finite voltage, got {volts!r}")
        self.configure("set_offset", value=volts)
        self.settings["offset"] = volts

    def set_load(self, ohms: float | None) -> None:
        """Output load setting: None for high impedance, else the load in Ω."""
        if ohms is not None and not (math.isfinite(ohms) and ohms > 0):
            raise InstrumentError(self.name, f"load must be > 0 Ω or high impedance, got {ohms!r}")
        self.configure("set_load", value="INF" if ohms is None else float(ohms))
        self.settings["load"] = "high" if ohms is None else float(ohms)


def load_setting(text: Any) -> tuple[float | None, str | None]:
    """The ``load`` option as Ω (None: high impedance), and the problem with it (None when fine)."""
    t = str(text).strip().lower()
    if t in ("high", "hiz", "inf"):
        return None, None
    try:
        ohms = float(t.removesuffix("ω").removesuffix("ohm").strip())
    except ValueError:
        return None, f"'load' must be 'high' or a resistance in Ω, got {text!r}"
    if not (math.isfinite(ohms) and ohms > 0):
        return None, f"'load' must be > 0 Ω, got {text!r}"
    return ohms, None
