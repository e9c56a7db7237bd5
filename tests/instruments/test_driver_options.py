"""Each driver declares its station options; the loader asks it through the registry."""

from __future__ import annotations

import textwrap

import pytest

from benchgate.errors import StationErrors
from benchgate.instruments import load_station
from benchgate.instruments.options import OptionSpec
from benchgate.instruments.registry import Registry
from benchgate.instruments.scpi_digitizer import ScpiDigitizer
from benchgate.instruments.scpi_dmm import ScpiDmm
from benchgate.instruments.scpi_supply import ScpiSupply


def errors_of(tmp_path, text: str) -> list[str]:
    path = tmp_path / "station.yaml"
    path.write_text(textwrap.dedent(text))
    with pytest.raises(StationErrors) as info:
        load_station(path)
    return info.value.lines()


def test_misspelt_scpi_option_is_refused_at_its_key(tmp_path):
    # the case: `reest: true` used to be passed to the driver and ignored
    lines = errors_of(tmp_path, """\
        station: b
        instruments:
          supply:
            kind: scpi-supply
            resource: "TCPIP0::127.0.0.1::5025::SOCKET"
            reest: true
        """)
    path = tmp_path / "station.yaml"
    assert len(lines) == 1
    assert lines[0] == (f"{path}:6:12: unknown key 'reest' for a scpi-supply (expected: accuracy, calibration, "
                        "commands, reset, resync_timeout, timeout, visa_library)")


@pytest.mark.parametrize("body, where, message", [
    ("reset: maybe", "5:12", "'reset' must be true or false"),
    ("resync_timeout: 2 V", "5:21", "expected a time"),  # read as the quantity the driver declares
    ("resync_timeout: -1 s", "5:21", "must be greater than zero"),
    ("commands: {set_voltge: 'VOLT {value}'}", "5:16", "unknown command template 'set_voltge'"),
    ("commands: {set_voltage: 'VOLT {volts}'}", "5:16", "uses {volts}"),
    ("accuracy: {supply_voltage: {gain: 1 %, ofset: 2 mV}}", "5:16", "must have only 'gain' and 'offset'"),
    ("rate: 10 kHz", "5:11", "unknown key 'rate' for a scpi-supply"),  # a digitizer option, not a supply's
])
def test_supply_option_problems_with_positions(tmp_path, body, where, message):
    lines = errors_of(tmp_path, f"""\
        station: b
        instruments:
          supply:
            kind: scpi-supply
            {body}
            resource: x
        """)
    hits = [line for line in lines if message in line]
    assert hits, lines
    assert f"station.yaml:{where}:" in hits[0]


def test_digitizer_declares_its_own_options(tmp_path):
    assert {"rate", "channels", "clock_ppm", "range"} <= set(ScpiDigitizer.station_options())
    assert "rate" not in ScpiDmm.station_options() and "reset" in ScpiDmm.station_options()
    path = tmp_path / "station.yaml"
    path.write_text("station: b\ninstruments:\n  digitizer: {kind: scpi-digitizer, resource: x, "
                    "rate: 50 kHz, channels: [out], clock_ppm: 20, range: 5 V}\n")
    cfg = load_station(path).instruments["digitizer"]
    assert cfg.option("rate") == 50_000.0 and cfg.option("range") == 5.0
    lines = errors_of(tmp_path, "station: b\ninstruments:\n  digitizer: {kind: scpi-digitizer, "
                                "resource: x, rate: fast}\n")
    assert any("got 'fast'" in line for line in lines), lines
    lines = errors_of(tmp_path, "station: b\ninstruments:\n  digitizer: {kind: scpi-digitizer, "
                                "resource: x, range: 2 kHz, clock_ppm: -3}\n")
    assert any("expected a voltage in V" in line for line in lines), lines
    lines = errors_of(tmp_path, "station: b\ninstruments:\n  digitizer: {kind: scpi-digitizer, "
                                "resource: x, channels: out, clock_ppm: -3}\n")
    assert any("-3 is out of range (0 … 1e+06)" in line for line in lines), lines
    assert any("'channels' must be a list or a mapping" in line for line in lines), lines


def test_the_loader_asks_the_registry(tmp_path):
    class StrictSupply(ScpiSupply):
        OPTIONS = {"rail": OptionSpec("text", "which rail")}

    path = tmp_path / "station.yaml"
    path.write_text("station: b\ninstruments:\n  supply: {kind: scpi-supply, resource: x, rail: V1}\n")
    with pytest.raises(StationErrors):
        load_station(path)  # the built-in supply has no 'rail'
    station = load_station(path, Registry({"scpi-supply": StrictSupply}))
    assert station.instruments["supply"].option("rail") == "V1"


def test_the_serial_adc_declares_its_options_too(tmp_path):
    from benchgate.instruments.serial_adc import SerialAdc

    specs = SerialAdc.station_options()
    assert {"baudrate", "protocol", "channels", "bits", "vref", "max_loss", "handshake"} <= set(specs)

    class AdcWithGain(SerialAdc):
        @classmethod
        def station_options(cls):
            return {**super().station_options(), "front_gain": OptionSpec("number", "a front-end gain")}

    path = tmp_path / "station.yaml"
    path.write_text("station: b\ninstruments:\n  adc: {kind: serial-adc, port: /dev/x, front_gain: 2}\n")
    with pytest.raises(StationErrors):
        load_station(path)
    cfg = load_station(path, Registry({"serial-adc": AdcWithGain})).instruments["adc"]
    assert cfg.option("front_gain") == 2 and cfg.option("baudrate") == 115200  # defaults filled in
    assert cfg.option("rts_low") is False  # follows dtr_low
