"""Station files: loading, units, addresses, calibration, and errors with positions."""

from __future__ import annotations

import datetime as dt
import textwrap

import pytest

from benchgate.errors import StationErrors
from benchgate.instruments import load_station
from benchgate.instruments.station import Calibration

GOOD = """\
station: owl-bench-1
instruments:
  adc:
    kind: serial-adc
    port: /dev/pts/5
    baudrate: 115200
    protocol: framed
    channels: [out, rail]
    bits: 12
    vref: 3.3 V
    clock_ppm: 50
    dtr_low: true
    identify_timeout: 2 s
    timeout: 1 s
    max_loss: 0.1 %
    calibration:
      out: {gain: 1.002, offset: -3 mV, date: 2026-06-01, due: 2027-06-01}
  supply:
    kind: scpi-supply
    resource: "TCPIP0::127.0.0.1::5025::SOCKET"
    timeout: 2 s
    reset: true
    accuracy: {gain: 0.05 %, offset: 2 mV}
    commands: {set_voltage: "SOUR:VOLT {value}"}
    calibration: {date: 2026-06-01, due: 2027-06-01}
"""


def write(tmp_path, text: str, name: str = "station.yaml") -> str:
    path = tmp_path / name
    path.write_text(textwrap.dedent(text))
    return str(path)


def errors_of(tmp_path, text: str) -> list[str]:
    with pytest.raises(StationErrors) as info:
        load_station(write(tmp_path, text))
    return [e.one_line() for e in info.value.errors]


def test_good_station(tmp_path):
    path = write(tmp_path, GOOD)
    st = load_station(path)
    assert st.id == "owl-bench-1" and st.path == path
    assert st.capabilities == frozenset({"adc", "supply"})
    adc = st.instruments["adc"]
    assert (adc.kind, adc.address, adc.timeout) == ("serial-adc", "/dev/pts/5", 1.0)
    o = adc.options
    assert o["channels"] == ("out", "rail") and o["bits"] == 12 and o["vref"] == 3.3
    assert o["dtr_low"] is True and o["rts_low"] is True  # rts follows dtr unless given
    assert o["identify_timeout"] == 2.0 and o["clock_ppm"] == 50.0
    assert o["max_loss"] == pytest.approx(0.001)  # 0.1 % as a fraction
    out = adc.calibration.for_channel("out")
    assert out.gain == 1.002 and out.offset == pytest.approx(-0.003)
    assert adc.calibration.for_channel("rail") == Calibration()
    sup = st.instruments["supply"]
    assert sup.address == "TCPIP0::127.0.0.1::5025::SOCKET" and sup.timeout == 2.0
    assert sup.options["accuracy"] == {"gain": pytest.approx(0.0005), "offset": pytest.approx(0.002)}
    assert sup.options["commands"] == {"set_voltage": "SOUR:VOLT {value}"}
    assert sup.options["reset"] is True
    assert sup.calibration.due == dt.date(2027, 6, 1)


def test_usb_and_url_addresses(tmp_path):
    st = load_station(write(tmp_path, """\
        station: b
        instruments:
          adc: {kind: serial-adc, usb: {vid: 0x2341, pid: "0043", serial: A1}}
        """))
    assert st.instruments["adc"].address == "usb:2341:0043:A1"
    st = load_station(write(tmp_path, """\
        station: b
        instruments:
          adc: {kind: serial-adc, url: "socket://127.0.0.1:7000"}
        """))
    assert st.instruments["adc"].address == "socket://127.0.0.1:7000"


def test_errors_carry_file_line_column(tmp_path):
    text = """\
        station: b
        instruments:
          adc:
            kind: serial-adc
            port: /dev/ttyACM0
            vref: 3.3 s
            baudrat: 9600
          scope:
            kind: scpi-scope
        """
    lines = errors_of(tmp_path, text)
    path = str(tmp_path / "station.yaml")
    assert lines[0] == f"{path}:6:11: expected a voltage in V, got a time ('3.3 s')"
    assert lines[1].startswith(f"{path}:7:14: unknown key 'baudrat' for a serial-adc")
    assert lines[2].startswith(f"{path}:8:3: unknown instrument role 'scope'")


@pytest.mark.parametrize("body, message", [
    ("  adc: {port: /dev/x}", "instrument 'adc' has no 'kind'"),
    ("  adc: {kind: scpi-dmm, resource: x}", "kind 'scpi-dmm' cannot serve as 'adc'"),
    ("  adc: {kind: serial-adc, port: /dev/x, url: 'loop://'}", "needs exactly one address"),
    ("  adc: {kind: serial-adc}", "needs exactly one address (port / url / usb), got none"),
    ("  dmm: {kind: scpi-dmm, port: /dev/x}", "a scpi-dmm is addressed by resource, not 'port'"),
    ("  adc: {kind: serial-adc, port: /dev/x, bits: 40}", "'bits' must be a whole number from 1 to 16"),
    ("  adc: {kind: serial-adc, port: /dev/x, protocol: binary}", "'protocol' must be 'framed' or 'lines'"),
    ("  adc: {kind: serial-adc, port: /dev/x, channels: [a, a]}", "distinct channel names"),
    ("  adc: {kind: serial-adc, port: /dev/x, max_loss: 2}", "'max_loss' must be a fraction"),
    ("  adc: {kind: serial-adc, port: /dev/x, usb: {vid: 1}}", "needs exactly one address"),
    ("  adc: {kind: serial-adc, usb: {vid: 0x12345, pid: 1}}", "'vid' must be a 16-bit USB id"),
    ("  adc: {kind: serial-adc, port: /dev/x, timeout: 0 s}", "must be greater than zero"),
    ("  adc: {kind: serial-adc, port: /dev/x, channels: [out], calibration: {rail: {gain: 1}}}",
     "calibration for unknown channel 'rail'"),
    ("  dmm: {kind: scpi-dmm, resource: x, calibration: {date: 2026-13-01}}", "expected a date like"),
    ("  adc: {kind: serial-adc, port: /dev/x, handshake: false}", "needs 'protocol: lines'"),
    ("  adc: {kind: serial-adc, port: /dev/x, protocol: lines, handshake: false}", "needs its sample 'rate'"),
    ("  dmm: {kind: scpi-dmm, resource: x, calibration: {date: 2026-06-01, due: 2025-06-01}}",
     "due date is before its date"),
])
def test_bad_entries(tmp_path, body, message):
    lines = errors_of(tmp_path, f"station: b\ninstruments:\n{body}\n")
    assert any(message in line for line in lines), lines
    assert all(line.startswith(str(tmp_path / "station.yaml") + ":3:") for line in lines), lines


def test_top_level_problems(tmp_path):
    lines = errors_of(tmp_path, "stations: b\ninstruments: []\n")
    assert any(":1:1: unknown key 'stations'" in x for x in lines)
    assert any("missing 'station'" in x for x in lines)
    assert any(":2:14: 'instruments' must be a mapping" in x for x in lines)


def test_duplicate_key_is_an_error(tmp_path):
    lines = errors_of(tmp_path, "station: b\nstation: c\ninstruments: {}\n")
    assert lines[0].endswith(":2:1: duplicate key 'station' (first given at line 1, column 1)")


def test_missing_file(tmp_path):
    with pytest.raises(StationErrors, match="no such file"):
        load_station(str(tmp_path / "nope.yaml"))


class TestCalibrationStatus:
    today = dt.date(2026, 12, 1)

    def test_valid_expired_none(self):
        assert Calibration(due=dt.date(2027, 1, 1)).status(self.today) == "valid"
        assert Calibration(due=dt.date(2026, 11, 30)).status(self.today) == "expired"
        assert Calibration(due=dt.date(2026, 12, 1)).status(self.today) == "valid"  # due today: still valid
        assert Calibration(date=dt.date(2026, 1, 1)).status(self.today) == "none"

    def test_worst_channel_decides(self):
        cal = Calibration(channels={"out": Calibration(due=dt.date(2027, 1, 1)),
                                    "rail": Calibration(due=dt.date(2026, 1, 1))})
        assert cal.status(self.today) == "expired"
        d = cal.to_dict(self.today)
        assert d["due"] == "2026-01-01" and d["channels"]["rail"]["status"] == "expired"


@pytest.mark.parametrize(("body", "col", "message"), [
    # issue 9: every number of a station file is finite and plausible
    ("  adc: {kind: serial-adc, port: /dev/x, timeout: .nan}", 50, "is not a finite number"),
    ("  adc: {kind: serial-adc, port: /dev/x, vref: inf V}", 47, "finite"),
    ("  adc: {kind: serial-adc, port: /dev/x, clock_ppm: 1e999}", 52, "finite"),
    ("  adc: {kind: serial-adc, port: /dev/x, timeout: 1e9 s}", 50, "out of range"),
    ("  adc: {kind: serial-adc, port: /dev/x, rate: -.inf}", 47, "is not a finite number"),
    ("  adc: {kind: serial-adc, port: /dev/x, calibration: {gain: nan}}", 61, "finite"),
    ("  dmm: {kind: scpi-dmm, resource: x, accuracy: {gain: nan %}}", 55, "finite"),
    ("  dmm: {kind: scpi-dmm, resource: x, settle: 'inf s'}", 46, "finite"),
    ("  dmm: {kind: scpi-dmm, resource: x, averages: 1" + "0" * 400 + "}", 48, "finite"),
])
def test_non_finite_numbers(tmp_path, body, col, message):
    lines = errors_of(tmp_path, f"station: b\ninstruments:\n{body}\n")
    assert lines[0].startswith(f"{tmp_path / 'station.yaml'}:3:{col}: "), lines
    assert message in lines[0], lines


def test_station_errors_are_their_own_class_printed_like_plan_errors(tmp_path, capsys):
    # issue 10: a station file error is a StationError (not a PlanError), with file:line:col,
    # and the CLI prints every one of them as "benchgate: <file>:<line>:<col>: <message>"
    from benchgate.cli import main
    from benchgate.errors import PlanError, StationError

    path = write(tmp_path, "station: b\ninstruments:\n  adc: {kind: serial-adc, port: /dev/x, bits: 40, vref: nan}\n")
    with pytest.raises(StationErrors) as info:
        load_station(path)
    assert all(type(e) is StationError and not isinstance(e, PlanError) for e in info.value.errors)
    code = main(["station", path, "--no-open"])
    err = capsys.readouterr().err.splitlines()
    assert code == 2 and len(err) == 2, err
    assert err[0].startswith(f"benchgate: {path}:3:") and "'bits'" in err[0]
    assert err[1].startswith(f"benchgate: {path}:3:") and "finite" in err[1]


# issue 9: mutated station files load with finite numbers everywhere or fail with positions
_HOSTILE_STATION = [".nan", ".inf", "-.inf", "nan", "inf s", "1e999", "9" * 330, "-1", "0", "1e9 s",
                    "nan %", "{gain: .nan}", "[.inf]", "'inf V'", "~", "yes", "*x", "&x 1", "1e-320 s"]


def _all_numbers(value):
    if isinstance(value, dict) or hasattr(value, "items"):
        for v in value.values():
            yield from _all_numbers(v)
    elif isinstance(value, (list, tuple)):
        for v in value:
            yield from _all_numbers(v)
    elif isinstance(value, (int, float)) and not isinstance(value, bool):
        yield value


def test_station_fuzz_finite_or_positioned(tmp_path):
    import math
    import random

    rng = random.Random(9)  # fixed seed
    lines = GOOD.splitlines()
    targets = [i for i, ln in enumerate(lines) if ":" in ln and not ln.rstrip().endswith(":")]
    path = tmp_path / "station.yaml"
    for _ in range(150):
        mutated = list(lines)
        for i in rng.sample(targets, rng.randint(1, 2)):
            key = mutated[i].split(":", 1)[0]
            mutated[i] = f"{key}: {rng.choice(_HOSTILE_STATION)}"
        path.write_text("\n".join(mutated) + "\n")
        try:
            st = load_station(str(path))
        except StationErrors as exc:
            assert all(e.file == str(path) and e.line and e.column for e in exc.errors), exc.lines()
            continue
        for cfg in st.instruments.values():
            numbers = [cfg.timeout, *_all_numbers(dict(cfg.options))]
            if cfg.calibration is not None:
                numbers += [cfg.calibration.gain, cfg.calibration.offset]
            assert all(math.isfinite(x) for x in numbers if x is not None), (mutated, numbers)
