"""Small stand-ins for a plan, a station and a bench, so the runner is tested without ports."""

from __future__ import annotations

import datetime as _dt
import hashlib
import json
import math
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np

from benchgate.analysis.capture import AdcInfo, Capture
from benchgate.analysis.measurement import Measurement
from benchgate.errors import InstrumentDisconnected
from benchgate.instruments.facts import InstrumentFacts
from benchgate.plan.limits import Window

# ---------------------------------------------------------------- plan


@dataclass(frozen=True)
class Check:
    measurement: str
    window: Window
    line: int | None = None
    column: int | None = None


@dataclass(frozen=True)
class Step:
    id: str
    kind: str
    title: str = ""
    on_fail: str = "stop"
    retries: int = 0
    retry_prompt: str | None = None
    # supply
    voltage: float | None = None
    current_limit: float | None = None
    output: bool | None = None
    # wait
    seconds: float = 0.0
    # prompt
    text: str = ""
    ask: bool = False
    expect: str | None = None
    unattended_answer: str | None = None
    on_wrong_answer: str = "abort"
    # capture / reading
    instrument: str = "adc"
    channel: str = "out"
    rate: float | None = None
    duration: float = 0.1
    range: float | None = None
    power_on: bool = False
    harmonics: int = 10
    quantity: str = "supply_current"
    settle: float = 0.0
    checks: tuple = ()


@dataclass(frozen=True)
class Hazard:
    name: str
    text: str


@dataclass(frozen=True)
class Plan:
    id: str = "fake"
    version: str = "1"
    product: str = "FK-1"
    description: str = ""
    cautions: tuple = ()
    hazards: tuple = ()
    requires: frozenset = frozenset({"adc", "supply"})
    decision: str = "simple"
    steps: tuple = ()
    hash: str = "0" * 64
    path: str = "fake.yaml"


def freq_window(low=990.0, high=1010.0, decision=None):
    return Window(unit="Hz", low=low, high=high, decision=decision)


def standard_plan(**kw) -> Plan:
    steps = (
        Step("power", "supply", "set the supply", voltage=9.0, current_limit=0.05),
        Step("warm", "wait", "warm up", seconds=1.0),
        Step("tone", "capture", "capture the tone", power_on=True, duration=0.2,
             checks=(Check("frequency", freq_window()),)),
        Step("current", "reading", "supply current", instrument="supply", quantity="supply_current",
             settle=0.1, checks=(Check("supply_current", Window(unit="A", low=0.002, high=0.008)),)),
    )
    defaults = {"steps": steps}
    defaults.update(kw)
    return Plan(**defaults)


# ---------------------------------------------------------------- station


@dataclass(frozen=True)
class Calibration:
    due: _dt.date | None = None
    channels: dict = field(default_factory=dict)

    def status(self, today):
        if self.channels:
            states = [c.status(today) for c in self.channels.values()]
            return "expired" if "expired" in states else ("none" if "none" in states else "valid")
        if self.due is None:
            return "none"
        return "expired" if self.due < today else "valid"


@dataclass(frozen=True)
class InstrumentConfig:
    role: str
    kind: str = "fake"
    address: str = "fake://"
    calibration: Calibration | None = None
    file: str | None = "station.yaml"
    line: int | None = 3


@dataclass(frozen=True)
class Station:
    id: str = "fake-bench"
    path: str = "station.yaml"
    instruments: dict = field(default_factory=lambda: {r: InstrumentConfig(r) for r in ("adc", "supply")})


# ---------------------------------------------------------------- bench


class FakeSupply:
    name = "supply"
    address = "fake://supply"
    identity = "Owl Hollow fake supply"

    def __init__(self, current=0.004):
        self.on = False
        self.voltage = 0.0
        self.limit = None
        self.current = current
        self.log: list[str] = []
        self.fail_set_voltage = None  # an InstrumentError to raise
        self.fail_off = 0  # how many "output off" commands fail before one works

    def set_voltage(self, volts):
        if self.fail_set_voltage is not None:
            raise self.fail_set_voltage
        self.voltage = volts
        self.log.append(f"volt {volts}")

    def set_current_limit(self, amps):
        self.limit = amps

    def output(self, on):
        if not on and self.fail_off > 0:
            self.fail_off -= 1
            raise OSError("fake: output off lost")
        self.on = bool(on)
        self.log.append("on" if on else "off")

    def output_state(self):
        return self.on

    def measure_voltage(self):
        return Measurement("supply_voltage", self.voltage, "V", 0.01)

    def measure_current(self):
        return Measurement("supply_current", self.current if self.on else 0.0, "A", 0.0001)

    def close(self):
        self.on = False


class FakeAdc:
    name = "adc"
    address = "fake://adc"
    identity = "Owl Hollow fake ADC"
    channels = ("out",)

    def __init__(self, supply, frequency=1000.0, rate=20000.0):
        self.supply = supply
        self.frequency = frequency
        self.rate = rate
        self.supply_on_at_start: list[bool] = []
        self.disconnect_after = None  # fraction of the capture after which the device "goes away"

    def capture(self, channel, *, duration, rate=None, progress=None):
        rate = rate or self.rate
        self.supply_on_at_start.append(self.supply.on)
        n = int(duration * rate)
        if progress:
            progress(0.0, "started")
        t = np.arange(n) / rate
        v = 1.65 + np.sin(2 * math.pi * self.frequency * t)
        cap = Capture(v, rate, channel=channel, adc=AdcInfo(12, 3.3))
        if self.disconnect_after is not None:
            k = int(n * self.disconnect_after)
            raise InstrumentDisconnected("adc", "serial port went away mid-capture", partial=cap.slice(0, k))
        if progress:
            progress(1.0, "done")
        return cap

    def fixture_power(self, on):
        pass

    def close(self):
        pass


class FakeBench:
    def __init__(self, instruments: dict[str, Any]):
        self.instruments = instruments
        self.exited = False

    def __getitem__(self, role):
        return self.instruments[role]

    def get(self, role, default=None):
        return self.instruments.get(role, default)

    @property
    def supply(self):
        return self.instruments["supply"]

    def require_supply(self):
        return self.instruments["supply"]

    def recorder(self, role):
        return self.instruments[role]

    def facts(self):
        return [InstrumentFacts(role=r, kind="fake", address=i.address, identity=i.identity, calibration=None)
                for r, i in self.instruments.items()]

    def __enter__(self):
        return self

    def __exit__(self, *exc):
        self.exited = True
        sup = self.instruments.get("supply")
        if sup is not None:
            try:
                sup.output(False)
            except Exception:
                pass
        return False


def make_bench(frequency=1000.0, current=0.004):
    supply = FakeSupply(current=current)
    adc = FakeAdc(supply, frequency=frequency)
    return FakeBench({"supply": supply, "adc": adc})


# ---------------------------------------------------------------- services


def fake_analyze(capture, names, *, harmonics=10, views=False):
    """Frequency from zero crossings of the mean-removed record (enough for these stand-ins)."""
    from types import SimpleNamespace

    x = np.asarray(capture.samples) - np.mean(capture.samples)
    up = np.nonzero((x[:-1] < 0) & (x[1:] >= 0))[0]
    out = {}
    for name in names:
        if name == "frequency" and len(up) >= 2:
            f = (len(up) - 1) / ((up[-1] - up[0]) / capture.sample_rate)
            out[name] = Measurement("frequency", f, "Hz", 0.5)
        else:
            out[name] = Measurement.invalid(name, "Hz", "not computed by the stand-in")
    return SimpleNamespace(measurements=out, warnings=(), views=None)


def fake_save_capture(capture, path):
    path = Path(path)
    np.savez(path, samples=capture.samples, sample_rate=capture.sample_rate)
    return hashlib.sha256(path.read_bytes()).hexdigest()


class FakeLayout:
    def __init__(self, reports_dir, plan_id, serial, started):
        import re

        safe = re.sub(r"[^A-Za-z0-9._-]", "_", serial) or "unnamed"
        self.folder = Path(reports_dir) / plan_id / safe
        self.folder.mkdir(parents=True, exist_ok=True)
        self.stamp = started.replace(":", "").replace("+", "Z")

    def capture_path(self, step_id):
        return self.folder / f"{self.stamp}-{step_id}.npz"

    def report_path(self, verdict, ext):
        return self.folder / f"{self.stamp}-{verdict}.{ext}"


def fake_write_reports(record, layout, captures):
    path = layout.report_path(record.verdict.value, "json")
    path.write_text(json.dumps(record.to_dict(), default=str))
    return {"json": path}


class FakeDB:
    def __init__(self):
        self.rows: dict[str, dict] = {}
        self.closed = False

    def begin_run(self, record):
        self.rows[record.run_id] = {"serial": record.serial, "complete": False, "verdict": None}

    def finish_run(self, record, report_path):
        self.rows[record.run_id].update(complete=True, verdict=record.verdict.value, report=report_path)

    def close(self):
        self.closed = True


def services(bench, db=None):
    from benchgate.runner.session import Services

    db = db or FakeDB()
    return Services(open_bench=lambda station, clock=None, roles=None: bench, save_capture=fake_save_capture,
                    analyze=fake_analyze, write_reports=fake_write_reports, layout=FakeLayout,
                    open_db=lambda path: db), db


# ---------------------------------------------------------------- the person at the bench


def no_input(prompt):
    raise EOFError


def terminal(read=no_input, display=None):
    """The terminal face reading answers from ``read`` (a stand-in for stdin)."""
    from benchgate.cli.terminal import QuietDisplay, Terminal

    return Terminal(display or QuietDisplay(), read=read)


class Recording:
    """The terminal face on a display that keeps what it was told to show (``lines``)."""

    def __new__(cls, read=no_input):
        from benchgate.cli.terminal import QuietDisplay, Terminal

        class _Keep(QuietDisplay):
            def __init__(self):
                self.lines = []

            def announce(self, notice):
                self.lines.append(notice.line())

            def alarm(self, text):
                self.lines.append(text)

        face = Terminal(_Keep(), read=read)
        face.lines = face.display.lines
        return face
