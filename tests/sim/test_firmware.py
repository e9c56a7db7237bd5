"""The reference firmware itself on simavr: its build, exact timer-paced sampling, the time base
in the frames, the ADC clock it picks, and the harness's clock and lockstep with the circuit.
"""

from __future__ import annotations

import re
import shutil
import subprocess
import sys
import threading
import time
from pathlib import Path

import numpy as np
import pytest
from firmware_support import ON_CI, RawPort, bench, instruments, need_firmware

from benchgate.instruments.framing import FrameDecoder
from benchgate.sim.firmware import F_AVR, build_dir, find_build
from waiting import wait_until

pytestmark = pytest.mark.skipif(sys.platform == "win32", reason="needs POSIX pseudo-terminals")

FIRMWARE = Path(__file__).resolve().parents[2] / "firmware"
PS_PER_CYCLE = 62_500  # 1e12 ps / 16 MHz
# Cycles a conversion start may move around its tick: the interrupt response (4 cycles plus the
# current instruction's completion, or a short interrupts-off section of the main loop). The
# real ADC adds up to one ADC clock (1 us at 1 MHz) of its own when it syncs the start.
JITTER = 16


@pytest.fixture(autouse=True)
def _built():
    need_firmware()


def idn_fields(reply: str) -> dict[str, str]:
    return dict(kv.split("=", 1) for kv in reply.split(";")[1:])


def run_sets(port: RawPort, start: str) -> tuple[FrameDecoder, list]:
    port.send(start)
    decoder = FrameDecoder()
    return decoder, port.frames_until_end(decoder)


def test_build_reports_flash_and_ram_within_the_chip(tmp_path):
    if shutil.which("avr-gcc") is None:
        if ON_CI:
            pytest.fail("CI builds the firmware: avr-gcc must be installed (.ci/run)")
        pytest.skip("avr-gcc is not installed")
    out = subprocess.run(["make", "-C", str(FIRMWARE), f"BUILD={tmp_path}", "firmware"], capture_output=True,
                         text=True, check=True).stdout
    program = int(re.search(r"Program:\s+(\d+) bytes", out).group(1))
    data = int(re.search(r"Data:\s+(\d+) bytes", out).group(1))
    assert 0 < program <= 32 * 1024 - 512  # ATmega328P flash, less the bootloader's 512 bytes
    assert 0 < data <= 2048 - 256  # its RAM, with room left for the stack
    assert (tmp_path / "adc328p.hex").read_text().startswith(":")
    assert "-Werror" in out


def steady_start_stats(vb, port: RawPort, rate: int, mask: int, starts: int = 2000):
    """Stream until ``starts`` conversion starts on A0 have been counted after the first frame
    (the steady state), then stop; returns the harness's statistics of them."""
    port.command(f"RATE {rate}", "OK RATE")
    port.send(f"START 0 {mask}")
    port.until(bytes([0xA5, 0x5A]))
    vb.device.restart_start_stats()
    deadline = time.monotonic() + 30
    while vb.device.start_stats_restarting or vb.device.start_stats()[0] < starts:
        assert time.monotonic() < deadline, "the firmware stopped converting"
        port.read_more()
        port.buf.clear()
    stats = vb.device.start_stats()  # before STOP: a command arriving moves a few starts
    port.send("STOP")                # by the length of the receive interrupt
    port.until(b"OK STOP\n")
    return stats


@pytest.mark.parametrize("rate, cycles", [(50_000, 320), (44_100, 363), (20_000, 800)])
def test_conversions_start_at_exactly_the_timer_rate(rate, cycles):
    with bench("firmware") as vb, RawPort(vb) as port:
        count, span, shortest, longest = steady_start_stats(vb, port, rate, 1)
    # On average the timer's period to the cycle (no drift: the rate is exact). Each start
    # trails its tick by the interrupt latency, which the instruction being executed changes
    # by a few cycles (AVR interrupt response: 4 cycles plus the instruction's completion).
    assert count >= 2000
    assert abs(span - (count - 1) * cycles) <= JITTER
    assert cycles - JITTER <= shortest <= longest <= cycles + JITTER


def test_two_channels_start_sets_at_the_timer_rate():
    with bench("firmware") as vb, RawPort(vb) as port:
        count, span, shortest, longest = steady_start_stats(vb, port, 10_000, 3, starts=500)
    assert abs(span - (count - 1) * 1600) <= JITTER
    assert 1600 - JITTER <= shortest <= longest <= 1600 + JITTER


@pytest.mark.parametrize("rate, adc_clock, enob", [
    (2_000, 125_000, 10),   # /128: the datasheet's 50-200 kHz for full accuracy
    (7_000, 125_000, 10),
    (9_000, 250_000, 9),    # 13.5 ADC clocks of 128 cycles do not fit into 1778 cycles
    (15_000, 250_000, 9),   # /64
    (50_000, 1_000_000, 8),  # /16
    (90_000, 4_000_000, 6),  # /4
])
def test_rate_picks_the_adc_clock_and_the_frames_keep_the_timer_period(rate, adc_clock, enob):
    with bench("firmware") as vb, RawPort(vb) as port:
        achieved = float(port.command(f"RATE {rate}", "OK RATE").split()[2])
        fields = idn_fields(port.command("IDN?", "IDN "))
        assert int(fields["adc_clock"]) == adc_clock and int(fields["enob"]) == enob
        decoder, results = run_sets(port, "START 200 1")
    cycles = round(F_AVR / rate)
    assert achieved == pytest.approx(F_AVR / cycles, abs=1e-6)
    periods = {p for r in results for p in r.periods_ps}
    # the period comes from the timer (cycles x 62.5 ns), whatever ADC clock was picked
    assert periods == {cycles * PS_PER_CYCLE}
    assert decoder.end_total == 200


def test_low_rates_use_the_timer_prescaler():
    with bench("firmware") as vb, RawPort(vb) as port:
        assert port.command("RATE 100", "OK RATE") == "OK RATE 100.000000"  # 8 x 20000 cycles
        assert port.command("RATE 1", "OK RATE") == "OK RATE 1.000000"  # 256 x 62500 cycles
        assert port.command("RATE 100001", "ERR").startswith("ERR")


def test_six_channels_fit_only_at_lower_rates():
    with bench("firmware") as vb, RawPort(vb) as port:
        port.command("RATE 50000", "OK RATE")
        assert port.command("START 10 63", "ERR") == "ERR rate too high for that many channels"
        port.command("RATE 5000", "OK RATE")
        decoder, results = run_sets(port, "START 100 63")
    codes = np.concatenate([r.samples for r in results])
    assert codes.shape == (100, 6) and decoder.end_total == 100
    assert np.all(codes[:, 2:] == 0)  # A2..A5 are not wired on the understudy bench


def test_harness_clock_is_the_avrs_time():
    with bench("firmware") as vb:
        a = vb.clock.monotonic()
        vb.clock.sleep(0.05)
        b = vb.clock.monotonic()
        assert 0.05 <= b - a < 0.2
        assert vb.device.running
        assert vb.clock.measured_speed() > 0


def test_build_dir_is_found():
    assert find_build() is not None and (build_dir() / "avr-harness").is_file()


def test_pin_levels_convert_to_the_chips_codes():
    from benchgate.sim.firmware import chip_code_millivolts

    v = np.linspace(-0.5, 5.5, 200_001)
    mv = chip_code_millivolts(v).astype(np.int64)
    simavr = mv * 1023 // 5000  # simavr 1.6's conversion of an ADC pin given in mV
    chip = np.clip(np.rint(v / 5.0 * 1024), 0, 1023)  # ATmega328P datasheet: ADC = Vin * 1024 / Vref
    np.testing.assert_array_equal(simavr, chip)


def test_a_dead_harness_never_hangs_the_bench_clock():
    with bench("firmware") as vb:
        vb.device.disconnect()  # the harness is gone: the clock goes on at the ceiling
        done = threading.Event()
        threading.Thread(target=lambda: (vb.clock.sleep(0.2), done.set()), daemon=True).start()
        assert done.wait(timeout=10)
        assert not vb.device.running


def test_the_clock_states_the_speed_it_achieves():
    # a ceiling far above what simavr manages while streaming: the clock must not claim it
    with bench("firmware", speed=1000.0) as vb, RawPort(vb) as port:
        port.command("RATE 50000", "OK RATE")
        port.send("START 0 1")
        wall_end = time.monotonic() + 1.5
        while time.monotonic() < wall_end:  # stream for 1.5 s of wall time, reading as it comes
            port.read_more()
            port.buf.clear()
            speed = vb.clock.speed
        port.send("STOP")
        port.until(b"OK STOP\n")
    assert vb.clock.ceiling == 1000.0
    assert 0 < speed < 500.0


def test_disconnect_mid_capture_is_one_error_with_the_partial_record():
    from benchgate.errors import InstrumentDisconnected

    with bench("firmware", serial="OH-0009") as vb, instruments(vb) as opened:
        def pull():
            vb.clock.sleep(0.3)
            vb.faults.disconnect_adc()

        puller = threading.Thread(target=pull)
        puller.start()
        try:
            with pytest.raises(InstrumentDisconnected) as err:
                opened["adc"].capture("out", duration=2.0, rate=20_000)
        finally:
            puller.join()
    assert err.value.partial is not None and 0 < err.value.partial.n < 40_000


def test_auto_takes_the_firmware_when_built_and_says_which(monkeypatch, tmp_path):
    from benchgate.sim.bench import UnderstudyBench

    with UnderstudyBench("tb3", adc_device="auto") as ub:
        assert ub.adc_device == "firmware" and "reference firmware" in ub.adc_note
        firmware_station = ub.station_text().split("instruments:")[1]
    monkeypatch.setenv("BENCHGATE_FIRMWARE_BUILD", str(tmp_path / "not-built"))
    with UnderstudyBench("tb3", adc_device="auto") as ub:
        assert ub.adc_device == "python"
        assert "Python device model" in ub.adc_note and "make -C firmware" in ub.adc_note
        python_station = ub.station_text().split("instruments:")[1]
    # the same station either way, but for the addresses of this run's ports
    def shape(text):
        return [line for line in text.splitlines() if "port:" not in line and "resource:" not in line]

    assert shape(firmware_station) == shape(python_station)


def test_a_board_that_goes_away_releases_its_fixture_relay():
    with bench("firmware") as vb, RawPort(vb) as port:
        assert port.command("POWER ON", "OK POWER") == "OK POWER ON"
        assert vb.state.relay
        vb.faults.disconnect_adc()
        wait_until(lambda: not vb.state.relay, timeout=10, what="fixture relay released")
        assert not vb.state.relay


def test_lines_overruns_are_counted_never_hidden():
    # ~45 kS/s of "511\n" lines need ~180 kB/s; 2 Mbaud carries ~182 kB/s in simavr, and the CPU
    # less: whole blocks of lines are dropped, and END still counts every sample taken
    with bench("firmware", protocol="lines") as vb, instruments(vb) as opened:
        adc = opened["adc"]
        adc.max_loss = 1.0
        cap = adc.capture("out", duration=0.3, rate=45_000)
    loss = cap.metadata["loss"]
    n = loss["requested_samples"]  # 0.3 s at the achieved 44 943.8 S/s (16 MHz / 356)
    assert n == 13_483 and loss["end_count"] == n and loss["unlocated"] > 0
    assert loss["lost_samples"] >= loss["unlocated"] and cap.n + loss["lost_samples"] == n
    assert any("cannot locate" in w for w in cap.metadata["warnings"])
