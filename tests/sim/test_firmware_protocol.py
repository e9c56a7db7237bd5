"""Protocol v1 (docs/serial-protocol.md) against both serial ADC devices of the understudy bench:
the Python device model and the reference firmware running on simavr. One suite, two devices.
"""

from __future__ import annotations

import sys
import threading

import numpy as np
import pytest
from firmware_support import DEVICES, RawPort, bench, instruments, power_up

from benchgate.analysis import analyze
from benchgate.instruments.framing import FrameDecoder
from benchgate.sim import serial_device

pytestmark = pytest.mark.skipif(sys.platform == "win32", reason="needs POSIX pseudo-terminals")

F_AVR = 16_000_000  # both devices derive their rates from a 16 MHz clock and an integer divider


@pytest.fixture(params=DEVICES)
def device(request) -> str:
    return request.param


def test_identify(device):
    with bench(device) as vb, instruments(vb) as opened:
        adc = opened["adc"]
        assert adc.identity
        info = adc._device_info
        assert info["proto"] == "1" and info["bits"] == "10" and info["vref"] == "5.0"
        assert info["mode"] == "framed" and len(info["channels"].split(",")) >= 2
        if device == "firmware":  # the ADC clock and the bits it gives are stated
            assert info["adc_clock"] == "1000000" and info["enob"] == "8"  # 50 kS/s default


def test_rate_set_and_readback(device):
    with bench(device) as vb, RawPort(vb) as port:
        assert port.command("RATE 20000", "OK RATE") == "OK RATE 20000.000000"
        assert port.command("RATE?", "OK RATE") == "OK RATE 20000.000000"
        achieved = float(port.command("RATE 44100", "OK RATE").split()[2])
        assert achieved == pytest.approx(F_AVR / round(F_AVR / 44100), abs=1e-6)  # divider 363
        assert float(port.command("RATE?", "OK RATE").split()[2]) == achieved
        assert port.command("RATE 0", "ERR").startswith("ERR")
        assert port.command("RATE fast", "ERR").startswith("ERR")
        assert port.command("FLY", "ERR").startswith("ERR")
        assert port.command("START 10 0", "ERR").startswith("ERR")  # no channel selected
        assert port.command("RATE?", "OK RATE").split()[2] == f"{achieved:.6f}"  # unchanged by errors


def test_framed_capture_matches_the_circuit_within_its_u(device):
    with bench(device, serial="OH-0001") as vb, instruments(vb) as opened:
        power_up(opened, vb)
        cap = opened["adc"].capture("out", duration=0.5, rate=50_000)
    assert cap.n == 25_000 and cap.sample_rate == 50_000.0
    assert cap.metadata["loss"]["lost_samples"] == 0  # (the host stops reading at n sets: END may not be in)
    m = analyze(cap, ["frequency", "amplitude"]).measurements
    f = m["frequency"]
    assert f.valid and f.uncertainty is not None
    # the circuit simulation's settled frequency is the truth; the board's crystal is 18 ppm off
    assert abs(f.value - vb.unit.steady_frequency()) <= f.uncertainty
    assert 0.6 < m["amplitude"].value < 1.4  # the interfaces' figures for a good TB-3


def test_supply_switched_on_mid_capture_reaches_the_circuit(device):
    with bench(device, serial="OH-0004") as vb, instruments(vb) as opened:
        supply = opened["supply"]
        supply.set_voltage(9.0)
        supply.set_current_limit(0.05)
        switch = threading.Thread(target=lambda: (vb.clock.sleep(0.1), supply.output(True)))
        switch.start()
        try:
            cap = opened["adc"].capture("out", duration=0.6, rate=50_000)
        finally:
            switch.join()
    v = cap.samples
    assert np.ptp(v[:2000]) < 0.02  # flat: not powered yet (10-bit codes, 4.9 mV apart)
    assert np.ptp(v[-5000:]) > 1.2  # oscillating at the end
    assert analyze(cap, ["startup_time"]).measurements["startup_time"].valid


@pytest.mark.parametrize("board", ["wo1", "pf2"])
def test_the_other_boards_through_the_adc(device, board):
    with bench(device, board=board, serial=f"{board.upper()}-1") as vb, instruments(vb) as opened:
        power_up(opened, vb)
        cap = opened["adc"].capture("out", duration=0.3, rate=50_000)
    assert cap.metadata["loss"]["lost_samples"] == 0
    f = analyze(cap, ["frequency"]).measurements["frequency"]
    truth = vb.unit.steady_frequency()  # the circuit simulation's settled frequency
    assert f.valid and f.value == pytest.approx(truth, rel=2e-3)  # as tests/sim/test_bench.py


def test_lines_capture(device):
    with bench(device, protocol="lines", serial="OH-0002") as vb, instruments(vb) as opened:
        power_up(opened, vb)
        cap = opened["adc"].capture("out", duration=0.3, rate=20_000)
    assert cap.n == 6000 and cap.metadata["loss"]["lost_samples"] == 0
    f = analyze(cap, ["frequency"]).measurements["frequency"]
    assert f.valid and abs(f.value - vb.unit.steady_frequency()) <= f.uncertainty


def test_lines_mode_streams_one_channel_only(device):
    with bench(device, protocol="lines") as vb, RawPort(vb) as port:
        assert port.command("START 10 3", "ERR").startswith("ERR")


def test_two_channels_in_one_frame(device):
    with bench(device, serial="OH-0003") as vb, RawPort(vb) as port:
        assert port.command("POWER ON", "OK POWER") == "OK POWER ON"  # the fixture relay
        assert vb.state.relay
        vb.clock.sleep(0.3)
        port.command("RATE 10000", "OK RATE")
        port.send("START 2000 3")
        decoder = FrameDecoder(mask=3)
        results = port.frames_until_end(decoder)
        assert port.command("POWER OFF", "OK POWER") == "OK POWER OFF"
        assert not vb.state.relay
    codes = np.concatenate([r.samples for r in results])
    assert codes.shape == (2000, 2) and decoder.end_total == 2000
    # channel 1 (rail) reads 9 V through the 1/4 divider: 2.25 V of 5 V in 10 bits
    assert np.median(codes[:, 1]) == pytest.approx(2.25 / 5.0 * 1024, abs=3)
    assert np.ptp(codes[-500:, 0]) > 300  # channel 0 (out) oscillates


def test_stop_mid_stream(device):
    with bench(device) as vb, RawPort(vb) as port:
        port.command("RATE 20000", "OK RATE")
        port.send("START 0 1")
        decoder = FrameDecoder(mask=1)
        got = 0
        while got < 2000:  # until enough has arrived (an event, not a fixed wait)
            port.read_more()
            if port.buf:
                got += decoder.feed(bytes(port.buf)).samples.shape[0]
                port.buf.clear()
        port.send("STOP")
        tail = port.until(b"OK STOP\n")  # END comes first, then the reply
        result = decoder.feed(tail[:-len(b"OK STOP\n")])
        got += result.samples.shape[0]
        assert result.lost == 0 and result.rejected == 0
        assert decoder.end_total == got == decoder.next_index  # every set taken was sent
        assert port.command("RATE?", "OK RATE") == "OK RATE 20000.000000"  # answering again


def test_slow_host_overruns_are_counted_as_lost_sets(device, monkeypatch):
    # The host does not read for 2 s of a 5 s capture: the device's output backs up and whole
    # stretches are dropped (the Python model's backlog, the firmware's USB bridge, both 64 KiB).
    monkeypatch.setattr(serial_device, "MAX_BACKLOG", 65536)
    n = 250_000
    with bench(device) as vb, RawPort(vb) as port:
        port.command("RATE 50000", "OK RATE")
        port.send(f"START {n} 1")
        vb.clock.sleep(2.0)  # the slow host: a deadline on the bench clock, then it reads on
        decoder = FrameDecoder(mask=1)
        results = port.frames_until_end(decoder)
        if device == "firmware":
            assert vb.device.bridge_dropped > 0
    received = sum(r.samples.shape[0] for r in results)
    lost = sum(r.lost for r in results)
    gaps = [g for r in results for g in r.gaps]
    assert decoder.end_total == n
    assert lost > 0 and gaps and sum(b for _a, b in gaps) == lost  # counted, placed, never joined
    assert received + lost == n


def test_driver_refuses_a_capture_with_overruns_beyond_max_loss(device):
    if device == "python":
        pytest.skip("the Python device model cannot sample faster than its link")
    with bench(device) as vb, instruments(vb) as opened:
        from benchgate.errors import InstrumentError

        # 100 kS/s needs ~216 kB/s; 2 Mbaud carries ~182 kB/s in simavr (11 bit times a byte)
        with pytest.raises(InstrumentError, match="lost .* samples"):
            opened["adc"].capture("out", duration=0.2, rate=100_000)
