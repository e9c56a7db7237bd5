"""Serial ADC driver over a real pseudo-terminal (the simulated device in benchgate.sim)."""

from __future__ import annotations

import datetime as dt
import re
import sys
from types import SimpleNamespace

import numpy as np
import pytest
import serial

from benchgate.clock import ScaledClock, SystemClock
from benchgate.errors import InstrumentDisconnected, InstrumentError
from benchgate.instruments import _serial_port
from benchgate.instruments.serial_adc import SerialAdc
from benchgate.instruments.serial_options import ADC_DEFAULTS as _ADC_DEFAULTS
from benchgate.instruments.station import Calibration, InstrumentConfig
from benchgate.sim.serial_device import DeviceFaults, PtyAdcDevice, SineSource

pytestmark = pytest.mark.skipif(sys.platform == "win32", reason="needs POSIX pseudo-terminals")

SPEED = 10.0


def adc_config(port: str, calibration=None, **options) -> InstrumentConfig:
    opts = dict(_ADC_DEFAULTS, channels=("out", "rail"), bits=12, vref=3.3, clock_ppm=50.0,
                identify_timeout=2.0, max_loss=0.001)
    opts.update(options)
    if opts["rts_low"] is None:
        opts["rts_low"] = opts["dtr_low"]
    return InstrumentConfig("adc", "serial-adc", port, 1.0, opts, calibration)


@pytest.fixture
def clock():
    return ScaledClock(SPEED)


def peak_frequency(x: np.ndarray, rate: float) -> float:
    """FFT peak with 16x zero padding and parabolic interpolation (numpy as reference)."""
    x = x - x.mean()
    n = 16 * x.size
    spec = np.abs(np.fft.rfft(x * np.hanning(x.size), n))
    k = int(np.argmax(spec))
    a, b, c = np.log(spec[k - 1:k + 2])
    return (k + 0.5 * (a - c) / (a - 2 * b + c)) * rate / n


def test_capture_end_to_end(clock):
    cal = Calibration(channels={"out": Calibration(date=dt.date(2026, 1, 1), due=dt.date(2027, 1, 1),
                                                  gain=1.01, offset=0.01)})
    source = SineSource(frequency=997.0, channels=("out", "rail"))
    with PtyAdcDevice(source, clock=clock) as dev:
        with SerialAdc.open(adc_config(dev.port, calibration=cal), clock=clock) as adc:
            assert adc.identity == "Owl Hollow Kits,OH-ADC2,SIM-0001,1.0"
            cap = adc.capture("out", duration=0.5, rate=20_000)
    assert cap.n == 10_000 and cap.sample_rate == 20_000.0
    # numpy FFT peak as the reference estimate; 0.5 Hz is a quarter of the 2 Hz bin spacing
    assert abs(peak_frequency(cap.samples, cap.sample_rate) - 997.0) < 0.5
    # codes -> volts: code * vref / 2**bits, then gain and offset (common practice, no source)
    ref = SineSource(frequency=997.0)
    ref.start(20_000.0, 1)
    expect = 1.01 * ref.read(10_000)[:, 0] * (3.3 / 4096) + 0.01
    np.testing.assert_allclose(cap.samples, expect, rtol=0, atol=1e-12)
    meta = cap.metadata
    assert meta["instrument"]["identity"].startswith("Owl Hollow Kits")
    assert meta["calibration"]["due"] == "2027-01-01"
    assert meta["loss"]["lost_samples"] == 0
    assert cap.adc.bits == 12 and cap.adc.vref == 3.3 and cap.clock_ppm == 50.0


def test_garbage_and_a_lost_frame_under_the_threshold(clock):
    faults = DeviceFaults(garbage_probability=0.3, drop_frames={4}, corrupt_frames={7}, seed=2)
    with PtyAdcDevice(SineSource(channels=("out", "rail")), clock=clock, faults=faults, frame_samples=256) as dev:
        with SerialAdc.open(adc_config(dev.port, max_loss=0.1), clock=clock) as adc:
            cap = adc.capture("out", duration=0.3, rate=20_000)
    loss = cap.metadata["loss"]
    assert loss["lost_samples"] == 512 and loss["gaps"] == [[1024, 256], [1792, 256]]
    assert loss["garbage_bytes"] > 0 and cap.n == 6000 - 512
    assert "joined" in cap.metadata["warnings"][0]


def test_losses_above_max_loss_are_refused(clock):
    with PtyAdcDevice(SineSource(channels=("out", "rail")), clock=clock, faults=DeviceFaults(drop_frames={3})) as dev:
        with SerialAdc.open(adc_config(dev.port, max_loss=0.001), clock=clock) as adc:
            with pytest.raises(InstrumentError, match=r"lost 256 of 6000 samples .* capture refused"):
                adc.capture("out", duration=0.3, rate=20_000)
            # the port is still usable after the refusal
            dev.faults.drop_frames.clear()
            assert adc.capture("out", duration=0.05, rate=20_000).n == 1000


def test_disconnect_mid_capture_keeps_the_partial_record(clock):
    with PtyAdcDevice(SineSource(channels=("out", "rail")), clock=clock, faults=DeviceFaults(disconnect_after=0.6)) as dev:
        adc = SerialAdc.open(adc_config(dev.port), clock=clock)
        with pytest.raises(InstrumentDisconnected) as info:
            adc.capture("out", duration=1.0, rate=10_000)
        with pytest.raises(InstrumentDisconnected, match="was disconnected; reconnect it"):
            adc.capture("out", duration=0.1)
        adc.close()  # closing after the loss does not raise
        port = dev.port
    exc = info.value
    assert exc.instrument == "adc"
    found = re.match(rf"adc on {re.escape(port)} disconnected after (\d+\.\d) s of a 1\.0 s capture", exc.message)
    assert found and float(found.group(1)) >= 0.5  # the device pulled the cable at 0.6 s
    part = exc.partial
    assert part is not None and 256 <= part.n < 10_000
    ref = SineSource()
    ref.start(10_000.0, 1)
    np.testing.assert_allclose(part.samples, ref.read(part.n)[:, 0] * (3.3 / 4096), atol=1e-12)


def test_silent_device_hits_the_timeout_not_a_hang():
    # the device keeps the port open but stops sending after three frames (real time: the
    # accelerated clock's wall-time floor would let the whole duration pass first)
    clock = SystemClock()
    faults = DeviceFaults(drop_frames=set(range(3, 100_000)))
    with PtyAdcDevice(SineSource(channels=("out", "rail")), clock=clock, faults=faults) as dev:
        cfg = adc_config(dev.port)
        cfg = type(cfg)(cfg.role, cfg.kind, cfg.address, 0.2, cfg.options, None)  # timeout: 0.2 s
        with SerialAdc.open(cfg, clock=clock) as adc:
            with pytest.raises(InstrumentError, match=r"sent no data for 0\.2 s \(768 of 20000 samples received\)"):
                adc.capture("out", duration=1.0, rate=20_000)


def test_busy_port_is_reported(clock):
    with PtyAdcDevice(SineSource(channels=("out", "rail")), clock=clock) as dev:
        with SerialAdc.open(adc_config(dev.port), clock=clock):
            with pytest.raises(InstrumentError, match="busy: already open in this program"):
                SerialAdc.open(adc_config(dev.port), clock=clock)
        other = serial.Serial(dev.port, exclusive=True)  # another program holding the port
        try:
            with pytest.raises(InstrumentError, match="busy: another program has it open"):
                SerialAdc.open(adc_config(dev.port), clock=clock)
        finally:
            other.close()
        SerialAdc.open(adc_config(dev.port), clock=clock).close()  # free again


def test_slow_identify_is_awaited_within_the_deadline(clock):
    faults = DeviceFaults(identify_delay=1.2, startup_bytes=b"boot v0.9\r\n\x00\xff\xa5noise")
    with PtyAdcDevice(SineSource(channels=("out", "rail")), clock=clock, faults=faults) as dev:
        with SerialAdc.open(adc_config(dev.port, identify_timeout=3.0), clock=clock) as adc:
            assert adc.identity is not None
            cap = adc.capture("out", duration=0.1, rate=20_000)
        assert dev.commands.count("IDN?") >= 2  # asked again while the board "booted"
    assert cap.metadata["loss"]["garbage_bytes"] == 0  # the banner was flushed after identify


def test_missing_identify_fails_at_the_deadline(clock):
    with PtyAdcDevice(SineSource(channels=("out", "rail")), clock=clock, faults=DeviceFaults(identify_missing=True)) as dev:
        with pytest.raises(InstrumentError, match=r"did not identify within 0\.8 s"):
            SerialAdc.open(adc_config(dev.port, identify_timeout=0.8), clock=clock)
        assert dev.port not in _serial_port._open_ports  # released after the failure


def test_rate_mismatch_is_refused():
    clock = ScaledClock(2.0)  # the check needs 0.3 s of wall time
    with PtyAdcDevice(SineSource(channels=("out", "rail")), clock=clock, faults=DeviceFaults(rate_error=0.2)) as dev:
        with SerialAdc.open(adc_config(dev.port), clock=clock) as adc:
            with pytest.raises(InstrumentError, match=r"declares 20000 Hz but samples arrived at .* capture refused"):
                adc.capture("out", duration=1.0, rate=20_000)


def test_declared_rate_agrees_with_arrival_rate():
    clock = ScaledClock(2.0)
    with PtyAdcDevice(SineSource(channels=("out", "rail")), clock=clock, faults=DeviceFaults(rate_error=0.01)) as dev:
        with SerialAdc.open(adc_config(dev.port), clock=clock) as adc:
            cap = adc.capture("out", duration=1.0, rate=20_000)
    assert cap.metadata["rate"]["verified"] == "ok"  # 1 % off is inside the ±5 % cross-check


def test_dtr_and_rts_are_low_at_open(clock, monkeypatch):
    seen = {}

    class SpySerial(serial.Serial):
        def open(self):
            seen["dtr"], seen["rts"], seen["exclusive"] = self.dtr, self.rts, self.exclusive
            super().open()

    def make(address):
        s = SpySerial()
        s.port = address
        return s

    monkeypatch.setattr(_serial_port, "make_serial", make)
    with PtyAdcDevice(SineSource(channels=("out", "rail")), clock=clock) as dev:
        SerialAdc.open(adc_config(dev.port, dtr_low=True), clock=clock).close()
        assert seen == {"dtr": False, "rts": False, "exclusive": True}
        SerialAdc.open(adc_config(dev.port), clock=clock).close()
        assert seen["dtr"] is True and seen["rts"] is True


def test_one_thread_owns_the_port(clock, monkeypatch):
    threads = set()

    class SpySerial(serial.Serial):
        def read(self, size=1):
            import threading

            threads.add(threading.current_thread().name)
            return super().read(size)

        def write(self, data):
            import threading

            threads.add(threading.current_thread().name)
            return super().write(data)

    def make(address):
        s = SpySerial()
        s.port = address
        return s

    monkeypatch.setattr(_serial_port, "make_serial", make)
    with PtyAdcDevice(SineSource(channels=("out", "rail")), clock=clock) as dev:
        with SerialAdc.open(adc_config(dev.port), clock=clock) as adc:
            adc.capture("out", duration=0.05)
            adc.fixture_power(True)
    assert len(threads) == 1 and next(iter(threads)).startswith("serial-adc")


def test_fixture_power_is_switched_off_on_close(clock):
    source = SineSource(channels=("out", "rail"))
    with PtyAdcDevice(source, clock=clock) as dev:
        with SerialAdc.open(adc_config(dev.port), clock=clock) as adc:
            adc.fixture_power(True)
            assert source.power is True
        assert source.power is False and dev.commands[-1] == "POWER OFF"


def test_lines_mode_rate_from_timestamps(clock):
    with PtyAdcDevice(SineSource(frequency=50.0, channels=("out", "rail")), protocol="lines", lines_timestamps=True, clock=clock) as dev:
        cfg = adc_config(dev.port, protocol="lines", timestamps=True)
        with SerialAdc.open(cfg, clock=clock) as adc:
            cap = adc.capture("out", duration=0.5, rate=2000)
    assert cap.n == 1000
    assert cap.sample_rate == pytest.approx(2000.0, rel=1e-9)  # 500 µs steps, exactly
    assert abs(peak_frequency(cap.samples, cap.sample_rate) - 50.0) < 0.2


def test_free_running_lines_device_without_commands(clock):
    # the simplest firmware: one integer per line from power-up, rate only in the station
    with PtyAdcDevice(SineSource(frequency=100.0), protocol="lines", free_running=True,
                      default_rate=4000.0, clock=clock) as dev:
        cfg = adc_config(dev.port, protocol="lines", handshake=False, rate=4000.0, channels=("out",))
        with SerialAdc.open(cfg, clock=clock) as adc:
            assert adc.identity is None
            cap = adc.capture("out", duration=0.5)
            with pytest.raises(InstrumentError, match="cannot be set to 8000 Hz"):
                adc.capture("out", duration=0.5, rate=8000)
            with pytest.raises(InstrumentError, match="no fixture-power command"):
                adc.fixture_power(True)
        assert dev.commands == []  # the host never sent it anything
    assert cap.n == 2000 and cap.sample_rate == 4000.0
    assert abs(peak_frequency(cap.samples, cap.sample_rate) - 100.0) < 0.3
    assert cap.samples.min() > 0.5 and cap.samples.max() < 2.8  # no cut first line misread


def test_unknown_channel_and_protocol_mismatch(clock):
    with PtyAdcDevice(SineSource(channels=("out", "rail")), clock=clock) as dev:
        with SerialAdc.open(adc_config(dev.port), clock=clock) as adc:
            with pytest.raises(InstrumentError, match="no channel 'vout'"):
                adc.capture("vout", duration=0.1)
        with pytest.raises(InstrumentError, match="streams 'framed' but the station says protocol 'lines'"):
            SerialAdc.open(adc_config(dev.port, protocol="lines"), clock=clock)


def test_usb_address_resolved_through_list_ports(monkeypatch):
    ports = [SimpleNamespace(device="/dev/ttyACM0", vid=0x2341, pid=0x0043, serial_number="A1"),
             SimpleNamespace(device="/dev/ttyACM1", vid=0x2341, pid=0x0043, serial_number="B2"),
             SimpleNamespace(device="/dev/ttyUSB0", vid=0x0403, pid=0x6001, serial_number="X")]
    monkeypatch.setattr("serial.tools.list_ports.comports", lambda: ports)
    assert _serial_port.resolve_usb("adc", "usb:2341:0043:B2") == "/dev/ttyACM1"
    with pytest.raises(InstrumentError, match="2 ports match USB 2341:0043"):
        _serial_port.resolve_usb("adc", "usb:2341:0043")
    with pytest.raises(InstrumentError, match=r"no serial port matches USB 1234:5678 \(ports: /dev/ttyACM0"):
        _serial_port.resolve_usb("adc", "usb:1234:5678")


def test_missing_port_is_one_clear_error(clock):
    with pytest.raises(InstrumentError, match="no such serial port /dev/does-not-exist"):
        SerialAdc.open(adc_config("/dev/does-not-exist"), clock=clock)


class ScriptedPort:
    """A stand-in serial port that answers each written line from a script (raw bytes)."""

    def __init__(self, script):
        self.script, self.pending = dict(script), b""
        self.baudrate = self.timeout = self.write_timeout = None

    def open(self):
        pass

    @property
    def in_waiting(self):
        return len(self.pending)

    def read(self, size=1):
        data, self.pending = self.pending[:size], self.pending[size:]
        return data

    def write(self, data):
        self.pending += self.script.get(data.strip().decode(), b"")
        return len(data)

    def flush(self):
        pass

    def reset_input_buffer(self):
        self.pending = b""

    def close(self):
        pass


def test_reply_found_behind_stale_binary_bytes(clock, monkeypatch):
    script = {
        "IDN?": b"IDN Owl Hollow Kits,X,1,1;proto=1;bits=12;channels=out,rail;mode=framed\n",
        # the late tail of an END frame (with a 0x0A in it), then the reply glued to more binary
        "RATE 1000.000000": b"\x02\x0a\x00\xa5\x5aOK RATE 1000.000000\n",
        "POWER ON": b"\x9c\x01ERR relay fault\n",
    }
    monkeypatch.setattr(_serial_port, "make_serial", lambda address: ScriptedPort(script))
    adc = SerialAdc.open(adc_config("/dev/scripted"), clock=clock)
    try:
        assert adc._call(adc._port.command, "RATE 1000.000000", "OK RATE") == "OK RATE 1000.000000"
        with pytest.raises(InstrumentError, match="adc refused 'POWER ON': relay fault"):
            adc.fixture_power(True)
    finally:
        adc.close()


def test_close_during_a_capture_stops_it(clock):
    import threading

    with PtyAdcDevice(SineSource(channels=("out", "rail")), clock=clock) as dev:
        adc = SerialAdc.open(adc_config(dev.port), clock=clock)
        started, result = threading.Event(), {}

        def work():
            try:
                adc.capture("out", duration=100.0, rate=1000, progress=lambda f, t: started.set())
            except InstrumentError as exc:
                result["error"] = exc

        worker = threading.Thread(target=work)
        worker.start()
        assert started.wait(10)
        adc.close()  # e.g. the operator aborted the run: the bench closes under the capture
        worker.join(10)
        assert "capture aborted" in result["error"].message


def test_a_stalled_host_never_makes_a_correct_device_look_fast():
    # A device at exactly 50 kS/s whose samples reach a busy host late: nothing for 0.3 s, then
    # everything taken so far in one burst, then on time again. Causality (a sample cannot arrive
    # before it is taken; common practice, no source) bounds the device's rate from below at or
    # under the truth, while the segment-median arrival estimate is fooled by the burst.
    from benchgate.instruments._serial_port import arrival_rate, least_rate

    rate, t0 = 50_000.0, 10.0
    points = []
    for k in range(1, 101):  # one host read every 10 ms over 1 s
        t = t0 + 0.01 * k
        taken = int(0.01 * k * rate)
        if 0.2 < t - t0 < 0.5:
            continue  # the host was busy: no read at all
        points.append((t + 0.0005, taken))  # 0.5 ms transport delay
    points.append((t0 + 0.5, int(0.5 * rate)))  # the catch-up burst, read at 0.5 s
    points.sort()
    assert least_rate(points, t0) <= rate
    # a starved host: a few reads on time, then 90 % of the record arrives in 40 reads 1 ms apart
    burst = [(t0 + 0.01 * k, 500 * k) for k in range(1, 11)]
    burst += [(t0 + 0.96 + 0.001 * i, 5_000 + 1_125 * i) for i in range(1, 41)]
    assert least_rate(burst, t0) <= rate  # a long stall, then almost everything at once
    assert arrival_rate(burst, rate) > 1.05 * rate  # what the median estimate made of it
