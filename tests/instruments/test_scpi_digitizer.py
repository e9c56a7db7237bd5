"""The SCPI digitizer: a 10^6-point IEEE 488.2 block through pyvisa-py, and the Capture it makes."""

from __future__ import annotations

import dataclasses
import datetime as dt

import numpy as np
import pytest
from scpi_testbench import config_for, make_bench

from benchgate.analysis.capture import Capture
from benchgate.clock import ManualClock
from benchgate.errors import InstrumentError
from benchgate.instruments.base import Digitizer
from benchgate.instruments.scpi_digitizer import ScpiDigitizer
from benchgate.instruments.station import Calibration


@pytest.fixture
def bench():
    b = make_bench(frequency=1234.5, amplitude=0.8, offset=0.1)
    yield b
    b.stop()


def expected_sine(rate: float, points: int) -> np.ndarray:
    # the stand-in backend's record, as float32 (the block's datatype) -- numpy as reference
    t = np.arange(points) / rate
    return (0.8 * np.sin(2 * np.pi * 1234.5 * t) + 0.1).astype(np.float32).astype(np.float64)


def test_million_point_block_round_trip(bench):
    rate, points = 1e6, 1_000_000
    with ScpiDigitizer.open(config_for(bench, "digitizer", timeout=2.0), clock=ManualClock()) as dig:
        assert isinstance(dig, Digitizer)
        cap = dig.capture("ch1", duration=points / rate, rate=rate)
    assert isinstance(cap, Capture)
    assert cap.n == points and cap.sample_rate == rate
    # IEEE 488.2 definite-length block of little-endian float32: every value arrives exactly
    np.testing.assert_array_equal(cap.samples, expected_sine(rate, points))
    # the data holds 0x0A bytes, so a reader stopping at the newline termination would fail
    assert b"\n" in expected_sine(rate, points).astype("<f4").tobytes()
    log = list(bench.instruments["digitizer"].received)
    assert "FORM:DATA REAL,32" in log and "FORM:BORD SWAP" in log
    assert log.index("INIT") < log.index("*OPC?") < log.index("FETC:WAV?")


def test_capture_metadata_names_the_instrument(bench):
    cal = Calibration(date=dt.date(2026, 6, 1), due=dt.date(2027, 6, 1))
    cfg = config_for(bench, "digitizer", channels={"out": "CH2"}, clock_ppm=20)
    cfg = dataclasses.replace(cfg, calibration=cal)
    with ScpiDigitizer.open(cfg) as dig:
        cap = dig.capture("out", duration=0.01, rate=50e3)
    assert cap.channel == "out" and cap.n == 500 and cap.clock_ppm == 20
    md = cap.metadata
    assert md["identity"] == bench.instruments["digitizer"].identity
    assert md["address"] == bench.resources["digitizer"]
    assert md["instrument"] == "digitizer" and md["instrument_channel"] == "CH2"
    assert md["calibration"]["due"] == "2027-06-01"
    assert bench.instruments["digitizer"].channel == "CH2"


def test_calibration_gain_and_offset_applied(bench):
    cfg = config_for(bench, "digitizer")
    cfg = dataclasses.replace(cfg, calibration=Calibration(gain=2.0, offset=-0.1))
    with ScpiDigitizer.open(cfg) as dig:
        cap = dig.capture("ch1", duration=0.001, rate=1e5)
    np.testing.assert_allclose(cap.samples, 2.0 * expected_sine(1e5, 100) - 0.1)


def test_rate_from_station_option(bench):
    with ScpiDigitizer.open(config_for(bench, "digitizer", rate=20e3)) as dig:
        cap = dig.capture("ch1", duration=0.005)
    assert cap.sample_rate == 20e3 and cap.n == 100


def test_unknown_channel_and_bad_settings(bench):
    with ScpiDigitizer.open(config_for(bench, "digitizer", channels=["out"])) as dig:
        with pytest.raises(InstrumentError, match="no channel 'rail'"):
            dig.capture("rail", duration=0.01, rate=1e4)
        with pytest.raises(InstrumentError, match="no sample rate"):
            dig.capture("out", duration=0.01)
        with pytest.raises(InstrumentError, match="fewer than 2 points"):
            dig.capture("out", duration=1e-6, rate=1e4)
        with pytest.raises(InstrumentError) as info:
            dig.capture("out", duration=0.01, rate=1e9)  # above the digitizer's maximum
        assert info.value.code == -222  # SCPI-99 data out of range


def test_steps_one_at_a_time(bench):
    with ScpiDigitizer.open(config_for(bench, "digitizer")) as dig:
        with pytest.raises(InstrumentError, match="before setup"):
            dig.arm()
        setup = dig.setup("ch1", duration=0.002, rate=1e5)
        assert setup["points"] == 200
        dig.arm()
        dig.wait()
        samples = dig.fetch()
    np.testing.assert_array_equal(samples, expected_sine(1e5, 200))


def test_late_block_drained_before_next_fetch(bench):
    with ScpiDigitizer.open(config_for(bench, "digitizer", timeout=0.2)) as dig:
        dig.setup("ch1", duration=0.01, rate=1e5)  # 1000 points
        dig.arm()
        dig.wait()
        bench.faults.slow("digitizer", 0.6)
        with pytest.raises(InstrumentError, match="no reply"):
            dig.fetch()
        samples = dig.fetch()  # the late block (binary, with 0x0A bytes) is discarded first
    np.testing.assert_array_equal(samples, expected_sine(1e5, 1000))
    assert dig.session.discarded_replies >= 1
