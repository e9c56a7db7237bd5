"""``benchgate sim`` as a separate process: prints where it is, stops cleanly on SIGINT."""

from __future__ import annotations

import json
import os
import select
import signal
import subprocess
import sys
import time

import pytest

from benchgate.instruments.station import load_station


def start(*args: str) -> subprocess.Popen:
    proc = subprocess.Popen([sys.executable, "-m", "benchgate", "sim", *args], stdout=subprocess.PIPE,
                            stderr=subprocess.PIPE, bufsize=0)
    proc.pending = b""
    return proc


def first_line(proc: subprocess.Popen, limit: float = 60.0) -> str:
    """The next line the process prints (read straight from the pipe, unbuffered)."""
    deadline = time.monotonic() + limit  # a generous ceiling, not a timing assertion
    fd = proc.stdout.fileno()
    while b"\n" not in proc.pending:
        ready, _, _ = select.select([fd], [], [], 0.5)
        if ready:
            chunk = os.read(fd, 4096)
            if not chunk:
                break
            proc.pending += chunk
        elif proc.poll() is not None or time.monotonic() > deadline:
            break
    if b"\n" not in proc.pending:
        proc.kill()
        raise AssertionError(f"no output from benchgate sim; stderr: {proc.stderr.read()!r}")
    line, _, proc.pending = proc.pending.partition(b"\n")
    return line.decode() + "\n"


def test_json_then_clean_stop_on_sigint(tmp_path):
    station = tmp_path / "bench.yaml"
    proc = start("--json", "--board", "wo1", "--speed", "5", "--write-station", str(station))
    try:
        info = json.loads(first_line(proc))
        assert os.path.exists(info["serial_port"])
        assert info["scpi_resource"] == info["scpi_resources"]["supply"]
        assert set(info["scpi_resources"]) == {"supply", "dmm", "counter", "digitizer"}
        assert info["station_file"] == str(station.resolve())
        st = load_station(info["station_file"])
        assert st.instruments["adc"].address == info["serial_port"]
        assert st.instruments["counter"].address == info["scpi_resources"]["counter"]
    finally:
        proc.send_signal(signal.SIGINT)
        out, err = proc.communicate(timeout=30)
    assert proc.returncode == 0, err
    assert b"Traceback" not in err


def test_text_output_and_sigterm():
    proc = start("--serial", "OH-77")
    try:
        lines = [first_line(proc)]
        while not lines[-1].startswith("Ctrl-C stops"):
            lines.append(first_line(proc))
        text = "".join(lines)
        assert "TB-3" in lines[0] and "OH-77" in lines[0]
        assert "/dev/pts/" in text and text.count("TCPIP0::127.0.0.1::") == 4
    finally:
        proc.send_signal(signal.SIGTERM)
        out, err = proc.communicate(timeout=30)
    assert proc.returncode == 0, err
    assert b"stopped" in out


@pytest.mark.parametrize("args, message", [
    (["--board", "pf2", "--defect", "open_section"], "open_section' means nothing for the PF-2"),
    (["--board", "zz"], "unknown board 'zz'"),
    (["--defect", "smoke"], "unknown defect 'smoke'"),
    (["--speed", "0"], "--speed must be a positive number"),
    (["--write-station", "/proc/no/such/dir/bench.yaml"], "cannot write the station file"),
])
def test_bad_requests_are_one_line_errors(args, message):
    proc = subprocess.run([sys.executable, "-m", "benchgate", "sim", *args], capture_output=True,
                          text=True, timeout=60)
    assert proc.returncode == 2
    lines = proc.stderr.strip().splitlines()
    assert len(lines) == 1 and message in lines[0] and lines[0].startswith("benchgate: ")


def test_adc_served_by_the_firmware_in_the_loop(tmp_path):
    sys.path.insert(0, os.path.join(os.path.dirname(__file__), "..", "sim"))
    from firmware_support import need_firmware

    need_firmware()
    import serial

    proc = start("--json", "--adc", "firmware", "--speed", "2", "--write-station", str(tmp_path / "s.yaml"))
    try:
        info = json.loads(first_line(proc))
        assert info["adc_device"] == "firmware"
        with serial.Serial(info["serial_port"], 2_000_000, timeout=0.2) as port:
            deadline = time.monotonic() + 30
            reply = b""
            while not reply.startswith(b"IDN ") and time.monotonic() < deadline:
                port.write(b"IDN?\n")  # again until the booting board answers, as the driver does
                reply = port.readline()
        assert b";proto=1;bits=10;vref=5.0;" in reply and b"adc_clock=" in reply
        # same station file as with the Python device model
        assert load_station(info["station_file"]).instruments["adc"].options["bits"] == 10
    finally:
        proc.send_signal(signal.SIGINT)
        out, err = proc.communicate(timeout=30)
    assert proc.returncode == 0, err


def test_adc_firmware_not_built_is_one_clear_error(tmp_path):
    env = dict(os.environ, BENCHGATE_FIRMWARE_BUILD=str(tmp_path / "nothing-here"))
    proc = subprocess.run([sys.executable, "-m", "benchgate", "sim", "--adc", "firmware"], env=env,
                          capture_output=True, text=True, timeout=60)
    assert proc.returncode != 0
    assert "make -C firmware" in proc.stderr and "Traceback" not in proc.stderr
    assert len(proc.stderr.strip().splitlines()) == 1
