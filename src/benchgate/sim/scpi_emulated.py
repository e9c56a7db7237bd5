"""The emulated SCPI instruments (supply, generator, DMM, counter, digitizer) behind the loopback server (``sim.scpi_server``).

Each is an :class:`~benchgate.sim.scpi_instrument_base.EmulatedInstrument` (message parsing,
error queue, event status register) answering from a :class:`~benchgate.sim.interfaces.ScpiBackend`.
The command set is described in ``docs/scpi.md``. Nothing here touches sockets.
"""

from __future__ import annotations

import re

import numpy as np

from benchgate.clock import Clock
from benchgate.sim.interfaces import ScpiBackend
from benchgate.sim.scpi_instrument_base import EmulatedInstrument
from benchgate.sim.scpi_parse import (
    ScpiCommandError,
    parse_bool,
    parse_number,
)


class EmulatedSupply(EmulatedInstrument):
    role = "supply"
    model = "PS30"
    MAX_VOLTAGE = 30.0
    MAX_CURRENT = 3.0

    def __init__(self, backend: ScpiBackend, clock: Clock | None = None, serial: str = "0001"):
        super().__init__(backend, clock, serial)
        self.add("[SOURce:]VOLTage[:LEVel][:IMMediate][:AMPLitude]", False, self._set_voltage)
        self.add("[SOURce:]VOLTage[:LEVel][:IMMediate][:AMPLitude]", True, lambda _a: f"{self.voltage:.6g}", False)
        self.add("[SOURce:]CURRent[:LEVel][:IMMediate][:AMPLitude]", False, self._set_current)
        self.add("[SOURce:]CURRent[:LEVel][:IMMediate][:AMPLitude]", True, lambda _a: f"{self.current_limit:.6g}", False)
        self.add("OUTPut[:STATe]", False, self._set_output)
        self.add("OUTPut[:STATe]", True, lambda _a: "1" if self.output else "0", False)
        self.add("MEASure[:SCALar]:VOLTage[:DC]", True, lambda _a: f"{self.backend.supply_voltage():.9g}", False)
        self.add("MEASure[:SCALar]:CURRent[:DC]", True, lambda _a: f"{self.backend.supply_current():.9g}", False)

    def reset(self) -> None:
        self.voltage, self.current_limit, self.output = 0.0, 0.1, False
        self._notify()

    def _notify(self) -> None:
        self.backend.supply_changed(self.voltage, self.current_limit, self.output)

    def _set_voltage(self, arg: str | None) -> None:
        self.voltage = parse_number(arg or "", 0.0, self.MAX_VOLTAGE)
        self._notify()

    def _set_current(self, arg: str | None) -> None:
        self.current_limit = parse_number(arg or "", 0.0, self.MAX_CURRENT)
        self._notify()

    def _set_output(self, arg: str | None) -> None:
        self.output = parse_bool(arg or "")
        self._notify()


class EmulatedGenerator(EmulatedInstrument):
    """A one-output function generator: SOURce FUNCtion / FREQuency / VOLTage (Vpp) / OFFSet,
    OUTPut:LOAD and OUTPut[:STATe]. Every change is told to the backend (``generator_changed``)."""

    role = "generator"
    model = "SG1"
    MAX_FREQUENCY = 1e6
    MAX_VPP = 20.0
    SHAPES = {"SIN": "sine", "SINUSOID": "sine", "SQU": "square", "SQUARE": "square",
              "TRI": "triangle", "TRIANGLE": "triangle"}

    def __init__(self, backend: ScpiBackend, clock: Clock | None = None, serial: str = "0001"):
        super().__init__(backend, clock, serial)
        self.add("[SOURce:]FUNCtion[:SHAPe]", False, self._set_shape)
        self.add("[SOURce:]FUNCtion[:SHAPe]", True, lambda _a: self._shape_mnemonic(), False)
        self.add("[SOURce:]FREQuency[:CW]", False, self._set_frequency)
        self.add("[SOURce:]FREQuency[:CW]", True, lambda _a: f"{self.frequency:.12g}", False)
        self.add("[SOURce:]VOLTage:UNIT", False, self._set_unit)
        self.add("[SOURce:]VOLTage:UNIT", True, lambda _a: "VPP", False)
        self.add("[SOURce:]VOLTage:OFFSet", False, self._set_offset)
        self.add("[SOURce:]VOLTage:OFFSet", True, lambda _a: f"{self.offset:.6g}", False)
        self.add("[SOURce:]VOLTage[:LEVel][:IMMediate][:AMPLitude]", False, self._set_vpp)
        self.add("[SOURce:]VOLTage[:LEVel][:IMMediate][:AMPLitude]", True, lambda _a: f"{self.vpp:.6g}", False)
        self.add("OUTPut:LOAD", False, self._set_load)
        self.add("OUTPut:LOAD", True, lambda _a: "INF" if self.load is None else f"{self.load:.6g}", False)
        self.add("OUTPut[:STATe]", False, self._set_output)
        self.add("OUTPut[:STATe]", True, lambda _a: "1" if self.output else "0", False)

    def reset(self) -> None:
        self.shape, self.frequency, self.vpp, self.offset = "sine", 1000.0, 0.1, 0.0
        self.load: float | None = None
        self.output = False
        self._notify()

    def settings(self) -> dict:
        return {"waveform": self.shape, "frequency": self.frequency, "vpp": self.vpp,
                "offset": self.offset, "load": self.load, "output": self.output}

    def _notify(self) -> None:
        changed = getattr(self.backend, "generator_changed", None)
        if changed is not None:
            changed(self.settings())

    def _shape_mnemonic(self) -> str:
        return {"sine": "SIN", "square": "SQU", "triangle": "TRI"}[self.shape]

    def _set_shape(self, arg: str | None) -> None:
        key = (arg or "").strip().upper()
        if key not in self.SHAPES:
            raise ScpiCommandError(-224, f"unknown function {key!r}")
        self.shape = self.SHAPES[key]
        self._notify()

    def _set_frequency(self, arg: str | None) -> None:
        self.frequency = parse_number(arg or "", 1e-3, self.MAX_FREQUENCY)
        self._notify()

    def _set_unit(self, arg: str | None) -> None:
        if (arg or "").strip().upper() != "VPP":
            raise ScpiCommandError(-224, "only VPP is supported")

    def _set_vpp(self, arg: str | None) -> None:
        vpp = parse_number(arg or "", 0.0, self.MAX_VPP)
        if abs(self.offset) + vpp / 2 > self.MAX_VPP / 2:
            raise ScpiCommandError(-221, "amplitude and offset together exceed the output range")
        self.vpp = vpp
        self._notify()

    def _set_offset(self, arg: str | None) -> None:
        offset = parse_number(arg or "", -self.MAX_VPP / 2, self.MAX_VPP / 2)
        if abs(offset) + self.vpp / 2 > self.MAX_VPP / 2:
            raise ScpiCommandError(-221, "amplitude and offset together exceed the output range")
        self.offset = offset
        self._notify()

    def _set_load(self, arg: str | None) -> None:
        a = (arg or "").strip().upper()
        self.load = None if a in ("INF", "INFINITY", "MAX") else parse_number(a, 1.0, 1e6)
        self._notify()

    def _set_output(self, arg: str | None) -> None:
        self.output = parse_bool(arg or "")
        self._notify()


class EmulatedDmm(EmulatedInstrument):
    role = "dmm"
    model = "DM6"

    def __init__(self, backend: ScpiBackend, clock: Clock | None = None, serial: str = "0001"):
        super().__init__(backend, clock, serial)
        self.add("MEASure[:SCALar]:VOLTage[:DC]", True, lambda _a: f"{self.backend.dmm_dc_voltage():.9g}", False)
        self.add("MEASure[:SCALar]:VOLTage:AC", True, lambda _a: f"{self.backend.dmm_ac_voltage():.9g}", False)
        self.add("MEASure[:SCALar]:CURRent[:DC]", True, lambda _a: f"{self.backend.dmm_dc_current():.9g}", False)


class EmulatedCounter(EmulatedInstrument):
    role = "counter"
    model = "FC1"

    def __init__(self, backend: ScpiBackend, clock: Clock | None = None, serial: str = "0001"):
        super().__init__(backend, clock, serial)
        self.add("MEASure[:SCALar]:FREQuency", True, lambda _a: f"{self.backend.counter_frequency():.12g}", False)


class EmulatedDigitizer(EmulatedInstrument):
    role = "digitizer"
    model = "DG2"
    MAX_RATE = 10e6
    MAX_POINTS = 16_000_000
    MAX_CHANNELS = 2

    def __init__(self, backend: ScpiBackend, clock: Clock | None = None, serial: str = "0001"):
        super().__init__(backend, clock, serial)
        self.add("ACQuire:SRATe", False, self._set_rate)
        self.add("ACQuire:SRATe", True, lambda _a: f"{self.rate:.12g}", False)
        self.add("ACQuire:POINts", False, self._set_points)
        self.add("ACQuire:POINts", True, lambda _a: str(self.points), False)
        self.add("ACQuire:CHANnel", False, self._set_channel)
        self.add("ACQuire:CHANnel", True, lambda _a: self.channel, False)
        self.add("[SENSe:]VOLTage:RANGe", False, self._set_range)
        self.add("[SENSe:]VOLTage:RANGe", True, lambda _a: f"{self.range:.6g}", False)
        self.add("FORMat[:DATA]", False, self._set_format)
        self.add("FORMat[:DATA]", True, lambda _a: "REAL,32", False)
        self.add("FORMat:BORDer", False, self._set_border)
        self.add("FORMat:BORDer", True, lambda _a: "SWAP" if self.little_endian else "NORM", False)
        self.add("INITiate[:IMMediate]", False, lambda _a: self._arm(), False)
        self.add("FETCh:WAVeform", True, lambda _a: self._fetch(), False)

    def reset(self) -> None:
        self.rate, self.points, self.channel, self.range = 100e3, 1000, "CH1", 10.0
        self.little_endian = False  # SCPI default byte order is NORMal (big-endian)
        self._record: np.ndarray | None = None
        self._block: tuple[str, bytes] | None = None
        self._done_at = 0.0

    def _set_rate(self, arg: str | None) -> None:
        self.rate = parse_number(arg or "", 1.0, self.MAX_RATE)

    def _set_points(self, arg: str | None) -> None:
        value = parse_number(arg or "", 2, self.MAX_POINTS)
        if value != int(value):
            raise ScpiCommandError(-224, f"points must be a whole number, got {value:g}")
        self.points = int(value)

    def _set_channel(self, arg: str | None) -> None:
        """One channel name, or up to :data:`MAX_CHANNELS` separated by commas (sampled at the
        same instants; the block then interleaves them sample by sample)."""
        names = [n.strip().strip("\"'") for n in (arg or "").split(",")]
        if not 1 <= len(names) <= self.MAX_CHANNELS or len(set(names)) != len(names):
            raise ScpiCommandError(-224, f"one to {self.MAX_CHANNELS} distinct channels, got {arg!r}")
        for name in names:
            if not re.fullmatch(r"[A-Za-z][A-Za-z0-9_]{0,11}", name):
                raise ScpiCommandError(-224, f"bad channel name {name!r}")
        if len(names) > 1 and not hasattr(self.backend, "digitizer_channels_at"):
            raise ScpiCommandError(-221, "this input has one channel only")
        self.channel = ",".join(names)

    def _set_range(self, arg: str | None) -> None:
        self.range = parse_number(arg or "", 0.01, 100.0)

    def _set_format(self, arg: str | None) -> None:
        if (arg or "").replace(" ", "").upper() != "REAL,32":
            raise ScpiCommandError(-224, "only REAL,32 is supported")

    def _set_border(self, arg: str | None) -> None:
        a = (arg or "").strip().upper()
        if a in ("SWAP", "SWAPPED"):
            self.little_endian = True
        elif a in ("NORM", "NORMAL"):
            self.little_endian = False
        else:
            raise ScpiCommandError(-224, f"byte order must be NORMal or SWAPped, got {a!r}")

    def _arm(self) -> None:
        self._armed_at = self.clock.monotonic()
        self._block = None
        self._done_at = self._armed_at + self.points / self.rate
        if "," in self.channel or hasattr(self.backend, "digitizer_record_at"):
            # the capture is taken when the acquisition completes, so whatever happens to the
            # unit while it runs (e.g. the supply switched on) is in it
            self._record = _PENDING
        else:
            self._record = self._clip(self.backend.digitizer_record(self.rate, self.points))

    def _clip(self, record) -> np.ndarray:
        return np.clip(np.asarray(record, dtype=np.float64), -self.range, self.range)

    def _wait_done(self) -> None:
        remaining = self._done_at - self.clock.monotonic()
        if remaining > 0:
            self.clock.sleep(remaining)
        if self._record is _PENDING:
            if "," in self.channel:  # several channels: (points, channels), interleaved by sample
                names = tuple(self.channel.split(","))
                block = self.backend.digitizer_channels_at(self._armed_at, self.rate, self.points, names)
                self._record = self._clip(np.asarray(block, dtype=np.float64).reshape(-1))
            else:
                self._record = self._clip(self.backend.digitizer_record_at(self._armed_at, self.rate, self.points))

    def operation_complete(self) -> str:
        if self._record is not None:
            self._wait_done()
        return "1"

    def _fetch(self) -> bytes:
        if self._record is None:
            raise ScpiCommandError(-230, "no acquisition since the last reset")
        self._wait_done()
        order = "<f4" if self.little_endian else ">f4"
        if self._block is None or self._block[0] != order:  # encode once per capture and order
            self._block = (order, definite_block(self._record.astype(order).tobytes()))
        return self._block[1]


_PENDING = np.empty(0)  # an acquisition armed whose capture is taken at completion


def definite_block(data: bytes) -> bytes:
    """IEEE 488.2 definite-length arbitrary block: ``#<n><length><bytes>``."""
    length = str(len(data)).encode()
    if len(length) > 9:
        raise ValueError("block too long for a definite-length header")
    return b"#" + str(len(length)).encode() + length + data


EMULATED = {
    "supply": EmulatedSupply,
    "generator": EmulatedGenerator,
    "dmm": EmulatedDmm,
    "counter": EmulatedCounter,
    "digitizer": EmulatedDigitizer,
}
