"""``benchgate capture`` against the simulated ADC on a real pty."""

from __future__ import annotations

import sys

import numpy as np
import pytest

from benchgate.capfile import load_capture
from benchgate.cli import main
from benchgate.sim.serial_device import DeviceFaults, PtyAdcDevice, SineSource

pytestmark = pytest.mark.skipif(sys.platform == "win32", reason="needs POSIX pseudo-terminals")


def station_file(tmp_path, port: str) -> str:
    path = tmp_path / "station.yaml"
    path.write_text(f"""\
station: cli-bench
instruments:
  adc:
    kind: serial-adc
    port: {port}
    channels: [out, rail]
    bits: 12
    vref: 3.3 V
    clock_ppm: 50
    calibration:
      out: {{gain: 1.0, offset: 0 mV, date: 2026-01-01, due: 2099-01-01}}
""")
    return str(path)


def test_capture_writes_an_npz_that_loads_back(tmp_path, capsys):
    out = tmp_path / "rec.npz"
    with PtyAdcDevice(SineSource(frequency=500.0, channels=("out", "rail"))) as dev:
        code = main(["capture", station_file(tmp_path, dev.port), "--instrument", "adc",
                     "--duration", "200ms", "--rate", "10k", "--channel", "out", "--out", str(out)])
    assert code == 0
    printed = capsys.readouterr().out
    assert "2000 samples of 'out' at 10.00 kHz" in printed
    cap = load_capture(out)
    assert cap.n == 2000 and cap.sample_rate == 10_000.0 and cap.channel == "out"
    assert cap.metadata["instrument"]["identity"].startswith("Owl Hollow Kits")
    assert cap.metadata["loss"]["lost_samples"] == 0
    assert cap.metadata["calibration"]["due"] == "2099-01-01"
    # 500 Hz at 10 kS/s: 100 cycles in 2000 samples, so the DFT peak sits on bin 100 (numpy)
    assert int(np.argmax(np.abs(np.fft.rfft(cap.samples - cap.samples.mean())))) == 100


def test_disconnect_is_one_line_and_keeps_the_partial(tmp_path, capsys):
    out = tmp_path / "rec.npz"
    faults = DeviceFaults(disconnect_after=0.15)
    with PtyAdcDevice(SineSource(channels=("out", "rail")), faults=faults) as dev:
        code = main(["capture", station_file(tmp_path, dev.port), "--duration", "0.5 s",
                     "--rate", "5000", "--out", str(out)])
    err = capsys.readouterr().err
    assert code == 3
    assert "benchgate: adc: adc on /dev/pts/" in err and "of a 0.5 s capture" in err
    assert "Traceback" not in err
    part = load_capture(out)
    assert part.metadata["partial"] is True and 0 < part.n < 2500


def test_unknown_instrument_and_bad_duration(tmp_path, capsys):
    path = station_file(tmp_path, "/dev/null-port")
    assert main(["capture", path, "--instrument", "digitizer", "--duration", "1s",
                 "--out", str(tmp_path / "x.npz")]) == 3
    assert "benchgate: digitizer: station 'cli-bench'" in capsys.readouterr().err
    with pytest.raises(SystemExit) as info:
        main(["capture", path, "--duration", "3 V", "--out", "x.npz"])
    assert info.value.code == 2
    assert "expected a time in s" in capsys.readouterr().err


def test_capture_with_the_supply_powers_the_unit_then_switches_off(tmp_path, capsys):
    from benchgate.analysis import analyze
    from benchgate.sim.bench import UnderstudyBench

    out = tmp_path / "tone.npz"
    with UnderstudyBench("tb3", workdir=tmp_path / "vb") as vb:
        code = main(["capture", str(vb.station_path), "--instrument", "adc", "--duration", "300ms",
                     "--supply", "9V", "--current-limit", "50mA", "--settle", "200ms",
                     "--out", str(out)])
        assert code == 0, capsys.readouterr().err
        assert vb.supply_output is False  # asked of the SCPI server itself
    result = analyze(load_capture(out), ["frequency"])
    freq = result.measurements["frequency"]
    # a powered TB-3 oscillates near 1/(2πRC√6) ≈ 955 Hz (handbook formula, docs/references.md);
    # loading and part tolerances move it by several percent
    assert freq.valid and 800.0 < freq.value < 1100.0


def test_supply_without_a_current_limit_is_refused(tmp_path, capsys):
    with PtyAdcDevice(SineSource(frequency=500.0, channels=("out", "rail"))) as dev:
        code = main(["capture", station_file(tmp_path, dev.port), "--duration", "100ms",
                     "--supply", "9V", "--out", str(tmp_path / "x.npz")])
    assert code == 2
    assert "--current-limit" in capsys.readouterr().err
    assert not (tmp_path / "x.npz").exists()
