"""``benchgate station``: identities, calibration status, failures as one line each."""

from __future__ import annotations

import sys

import pytest

from benchgate.cli import main
from benchgate.sim.serial_device import PtyAdcDevice, SineSource

pytestmark = pytest.mark.skipif(sys.platform == "win32", reason="needs POSIX pseudo-terminals")


def write(tmp_path, port: str, due: str) -> str:
    path = tmp_path / "station.yaml"
    path.write_text(f"""\
station: check-bench
instruments:
  adc:
    kind: serial-adc
    port: {port}
    channels: [out]
    calibration: {{date: 2020-01-01, due: {due}}}
""")
    return str(path)


def test_lists_identity_and_flags_expired_calibration(tmp_path, capsys):
    with PtyAdcDevice(SineSource()) as dev:
        code = main(["station", write(tmp_path, dev.port, "2021-01-01")])
    out = capsys.readouterr().out
    assert code == 0
    assert "station check-bench" in out and "serial ports:" in out
    assert "Owl Hollow Kits,OH-ADC2,SIM-0001,1.0" in out
    assert "calibration EXPIRED (due 2021-01-01)" in out


def test_valid_calibration(tmp_path, capsys):
    with PtyAdcDevice(SineSource()) as dev:
        assert main(["station", write(tmp_path, dev.port, "2099-01-01")]) == 0
    assert "calibration valid until 2099-01-01" in capsys.readouterr().out


def test_instrument_that_does_not_answer(tmp_path, capsys):
    code = main(["station", write(tmp_path, "/dev/no-such-adc", "2099-01-01")])
    captured = capsys.readouterr()
    assert code == 3
    assert "NOT ANSWERING" in captured.out
    assert captured.err.strip() == "benchgate: adc: no such serial port /dev/no-such-adc (is the adapter plugged in?)"


def test_bad_station_file_gives_its_position(tmp_path, capsys):
    path = tmp_path / "bad.yaml"
    path.write_text("station: x\ninstruments:\n  adc: {kind: serial-adc, port: /dev/x, bits: many}\n")
    assert main(["station", str(path)]) == 2
    assert f"benchgate: {path}:3:" in capsys.readouterr().err


def test_no_open_only_reads_the_file(tmp_path, capsys):
    assert main(["station", "--no-open", write(tmp_path, "/dev/no-such-adc", "2021-01-01")]) == 0
    out = capsys.readouterr().out
    assert "/dev/no-such-adc" in out and "calibration EXPIRED (due 2021-01-01)" in out
