"""The understudy bench: a simulated unit on a real pseudo-terminal and loopback SCPI ports.

:class:`UnderstudyBench` draws a unit of the chosen board, wires it to the virtual ADC (served by
:class:`~benchgate.sim.serial_device.PtyAdcDevice` on ``/dev/pts/N``) and to the emulated supply,
DMM, counter and digitizer (:class:`~benchgate.sim.scpi_server.ScpiBench` on 127.0.0.1), all on
one :class:`~benchgate.clock.ScaledClock`, and writes a station file that points at itself.
The runner must use :attr:`UnderstudyBench.clock` so its waits and the simulation agree.
"""

from __future__ import annotations

import datetime as dt
import json
import shutil
import tempfile
from pathlib import Path

from benchgate.clock import ScaledClock
from benchgate.sim.adc import VirtualAdc
from benchgate.sim.backend import BenchState, BoardBackend
from benchgate.sim.boards import Unit, draw_unit, get_board

ADC_IDENTITY = "Owl Hollow Kits,OH-ADC2,VB-0001,1.0"
# The serial ADC is the reference board (ATmega328P: 10 bits, AVcc = 5 V, 2 Mbaud) whichever
# device serves it, so one station file fits both.
ADC_BITS, ADC_VREF, ADC_BAUD = 10, 5.0, 2_000_000
ADC_DEVICES = ("python", "firmware", "auto")


class BenchFaults:
    """Fault injection on both servers: ``.adc`` (serial device faults: garbage, dropped and
    corrupted frames, disconnect, slow identify …) and ``.scpi`` (slow, missing or garbled
    replies); :meth:`inject_error` queues a SCPI error on one instrument."""

    def __init__(self, bench: UnderstudyBench):
        from benchgate.sim.scpi_server import ScpiFaults
        from benchgate.sim.serial_device import DeviceFaults

        self._bench = bench
        self.adc = DeviceFaults()
        self.scpi = ScpiFaults()

    def inject_error(self, role: str, code: int, text: str) -> None:
        self._bench.server.inject_error(role, code, text)

    def disconnect_adc(self) -> None:
        """Pull the ADC's cable now."""
        self._bench.device.disconnect()


def _q(text: str) -> str:
    return json.dumps(str(text))  # a JSON string is a valid YAML scalar


class UnderstudyBench:
    """A whole simulated bench. Use as a context manager (or call :meth:`close`).

    Parameters
    ----------
    board : {"tb3", "wo1", "pf2"}
    speed : float
        Virtual seconds per wall-clock second (``ScaledClock(speed)``).
    protocol : {"framed", "lines"}
        What the serial ADC speaks.
    workdir : path, optional
        Where the station file goes (a temporary folder, removed on close, when not given).
    serial, defect : str, optional
        The first unit loaded (see :meth:`load_unit`).
    adc_device : {"python", "firmware", "auto"}
        Who serves the serial ADC: the Python device model, or the reference firmware running
        on simavr (``sim.firmware``; ``speed`` is then a ceiling, the bench clock is the AVR's);
        "auto" takes the firmware when its harness is built. The station file is the same.
    """

    def __init__(self, board: str = "tb3", *, speed: float = 1.0, protocol: str = "framed",
                 workdir: str | Path | None = None, serial: str = "SIM-0001", defect: str | None = None,
                 adc_device: str = "python"):
        from benchgate.sim.scpi_server import ScpiBench
        from benchgate.sim.serial_device import PtyAdcDevice

        if protocol not in ("framed", "lines"):
            raise ValueError(f"protocol must be 'framed' or 'lines', got {protocol!r}")
        if adc_device not in ADC_DEVICES:
            raise ValueError(f"adc_device must be one of {', '.join(ADC_DEVICES)}, got {adc_device!r}")
        self.board = get_board(board)
        first = self._draw(serial, defect)  # bad input fails here, before any process starts
        firmware = None
        if adc_device != "python":
            from benchgate.sim import firmware as fw

            if adc_device == "firmware" or fw.find_build() is not None:
                firmware = fw.FirmwareAdcDevice(speed=speed, protocol=protocol)
        self.adc_device = "firmware" if firmware is not None else "python"
        self.clock = firmware.clock if firmware is not None else ScaledClock(speed)
        self.protocol = protocol
        self.state = BenchState(first, self.clock)
        self.adc = VirtualAdc(self.state, bits=ADC_BITS, vref=ADC_VREF)
        self.backend = BoardBackend(self.state)
        self.faults = BenchFaults(self)
        self._tmp = None
        if workdir is None:
            self._tmp = tempfile.mkdtemp(prefix="benchgate-ubench-")
            workdir = self._tmp
        self.workdir = Path(workdir)
        self.workdir.mkdir(parents=True, exist_ok=True)
        if firmware is not None:
            self.device = firmware.attach(self.state, self.adc)
        else:
            self.device = PtyAdcDevice(self.adc, protocol=protocol, clock=self.clock, faults=self.faults.adc,
                                       identity=ADC_IDENTITY, vref=ADC_VREF)
        self.server = ScpiBench(self.backend, clock=self.clock, faults=self.faults.scpi)
        self._closed = False
        try:
            self.device.start()
            self.server.start()
            self.station_path = self.write_station(self.workdir / "understudy-bench.yaml")
        except BaseException:
            self.close()
            raise

    # -- units ------------------------------------------------------------------------------
    def _draw(self, serial: str, defect: str | None) -> Unit:
        unit = draw_unit(self.board, serial, defect)
        unit.steady_frequency()  # integrate up to the settled cycle now, not inside a capture
        return unit

    def load_unit(self, serial: str, defect: str | None = None) -> Unit:
        """Put another unit on the fixture (parts drawn from its serial number); it is powered
        from this instant only if the supply output or the fixture relay is on."""
        unit = self._draw(serial, defect)
        self.state.load_unit(unit)
        return unit

    @property
    def adc_note(self) -> str:
        """One line saying who serves the serial ADC (for the demo and ``benchgate sim``)."""
        if self.adc_device == "firmware":
            return ("serial ADC: the reference firmware on simavr; the bench clock is the AVR's, "
                    "so the speed is a ceiling")
        from benchgate.sim.firmware import find_build

        why = "" if find_build() is not None else " (firmware harness not built: make -C firmware)"
        return f"serial ADC: the Python device model{why}"

    @property
    def unit(self) -> Unit:
        return self.state.unit

    # -- ports ------------------------------------------------------------------------------
    @property
    def serial_port(self) -> str:
        return self.device.port

    @property
    def resources(self) -> dict[str, str]:
        """role -> VISA resource of the SCPI instruments on the station (the generator only
        with a board it can drive)."""
        res = dict(self.server.resources)
        if not self.unit.stimulated:
            res.pop("generator", None)
        return res

    @property
    def supply_output(self) -> bool:
        return bool(self.server.supply_output)

    def station_text(self) -> str:
        today = dt.date.today()
        due = today + dt.timedelta(days=365)
        cal = f"date: {today.isoformat()}, due: {due.isoformat()}"
        res = self.resources
        driven = self.unit.stimulated  # a board with an input: the generator is on the station
        lines = [
            "# A understudy bench (benchgate sim): the serial ADC on a pseudo-terminal and the SCPI",
            "# instruments on loopback ports of this machine. Valid while that process runs.",
            "station: understudy-bench",
            f"description: {_q(f'understudy bench with a simulated {self.board.name}')}",
            "instruments:",
            "  adc:",
            "    kind: serial-adc",
            f"    port: {_q(self.serial_port)}",
            f"    baudrate: {ADC_BAUD}",
            f"    protocol: {self.protocol}",
            "    channels: [out, rail, in]" if driven else "    channels: [out, rail]",
            f"    bits: {ADC_BITS}",
            f"    vref: {ADC_VREF:g} V",
            "    clock_ppm: 50",
            "    dtr_low: true",
            "    identify_timeout: 2 s",
            "    timeout: 1 s",
            "    max_loss: 0.001",
            "    calibration:",
            f"      out: {{gain: 1.0, offset: 0 mV, {cal}}}",
            f"      rail: {{gain: 4.0, offset: 0 mV, {cal}}}",
            *([f"      in: {{gain: 1.0, offset: 0 mV, {cal}}}"] if driven else []),
        ]
        extra = {
            # Reading bounds per quantity: a voltage offset must not be read as amps.
            "supply": ["    accuracy:",
                       "      supply_voltage: {gain: 0.05 %, offset: 2 mV}",
                       "      supply_current: {gain: 0.1 %, offset: 20 µA}"],
            "dmm": ["    accuracy:",
                    "      dc_voltage: {gain: 0.02 %, offset: 0.5 mV}",
                    "      ac_voltage: {gain: 0.1 %, offset: 1 mV}",
                    "      dc_current: {gain: 0.05 %, offset: 5 µA}"],
            "counter": ["    accuracy: {gain: 0.0002 %, offset: 0.01 Hz}"],
            "digitizer": (["    channels: {out: OUT, in: IN}", "    rate: 200 kHz", "    range: 10 V",
                           "    clock_ppm: 20", "    channel_match: 0.001"] if driven else
                          ["    channels: [out]", "    rate: 200 kHz", "    range: 5 V", "    clock_ppm: 20"]),
            "generator": ["    max_amplitude: 10 V", "    max_frequency: 1 MHz", "    load: high"],
        }
        roles = ("supply", "generator", "dmm", "counter", "digitizer") if driven else (
            "supply", "dmm", "counter", "digitizer")
        for role in roles:
            lines += [f"  {role}:", f"    kind: scpi-{role}", f"    resource: {_q(res[role])}",
                      "    timeout: 2 s", "    reset: true", *extra[role], f"    calibration: {{{cal}}}"]
        return "\n".join(lines) + "\n"

    def write_station(self, path: str | Path) -> Path:
        path = Path(path)
        path.parent.mkdir(parents=True, exist_ok=True)
        path.write_text(self.station_text(), encoding="utf-8")
        return path

    # -- life cycle -------------------------------------------------------------------------
    def close(self) -> None:
        if getattr(self, "_closed", True):
            return
        self._closed = True
        try:
            self.state.set_supply(0.0, self.state.current_limit, False)
            self.state.set_relay(False)
        finally:
            try:
                self.server.stop()
            finally:
                try:
                    self.device.stop()
                finally:
                    if self._tmp is not None:
                        shutil.rmtree(self._tmp, ignore_errors=True)

    def __enter__(self) -> UnderstudyBench:
        return self

    def __exit__(self, *exc) -> None:
        self.close()
