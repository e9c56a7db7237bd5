"""``benchgate run`` leaves the bench safe: stop signals, a busy station, a dead supply.

Each test runs the real command (a subprocess where a signal or a second process matters) on the
understudy bench and asks the emulated SCPI supply itself whether its output is on.
"""

from __future__ import annotations

import json
import os
import random
import signal
import sqlite3
import subprocess
import sys
import threading
from pathlib import Path

import pytest

from benchgate.cli import main
from waiting import wait_until

REPO = Path(__file__).resolve().parents[2]
TB3 = REPO / "testplans" / "tb3.yaml"
SPEED = 4.0
STEP_IDS = ["supply-setup", "connect", "power-on", "supply-current", "warm-up", "steady", "supply-off"]


@pytest.fixture
def ubench(tmp_path):
    from benchgate.sim.bench import UnderstudyBench

    with UnderstudyBench("tb3", speed=SPEED, workdir=tmp_path / "ub") as ub:
        yield ub


def bg(*args, **kw):
    env = {k: v for k, v in os.environ.items() if k != "CI"}
    return subprocess.Popen([sys.executable, "-m", "benchgate", *map(str, args)], env=env,
                            stdin=subprocess.DEVNULL, stdout=subprocess.PIPE, stderr=subprocess.PIPE,
                            text=True, **kw)


def events_of(path: Path) -> list[dict]:
    if not path.exists():
        return []
    # complete lines only: the run may be half-way through writing the last one
    lines = path.read_text(encoding="utf-8").splitlines(keepends=True)
    return [json.loads(line) for line in lines if line.endswith("\n")]


def wait_for(path: Path, proc, *, event: str, step: str | None = None, timeout: float = 60.0) -> dict:
    """The first ``event`` (for ``step``) in the events file; fails if the run ends first."""
    def found():
        return next((e for e in events_of(path)
                     if e["event"] == event and (step is None or e.get("step") == step)), None)

    def ended():
        if proc is None or proc.poll() is None:
            return None
        return f"benchgate ended first: {proc.communicate()}"

    return wait_until(found, timeout=timeout, what=f"{event} {step}", abandon=ended)


def rows(db: Path) -> list[tuple]:
    conn = sqlite3.connect(db)
    try:
        return conn.execute("SELECT serial, complete, verdict, reason, report_path FROM runs").fetchall()
    finally:
        conn.close()


# ---------------------------------------------------------------- stop signals, fuzzed

SIGNALS = {signal.SIGINT: (130, "Ctrl-C"), signal.SIGTERM: (143, "SIGTERM"), signal.SIGHUP: (129, "SIGHUP")}
POINTS = ["run_started", "power-on", "warm-up", "steady"]


def _cases(seed: int = 2612) -> list[tuple[int, str]]:
    """Every signal at two points of the run, the points drawn with a fixed seed."""
    rng = random.Random(seed)
    return [(sig, point) for sig in SIGNALS for point in rng.sample(POINTS, 2)]


@pytest.mark.parametrize("signum, point", _cases(),
                         ids=lambda v: signal.Signals(v).name if isinstance(v, int) else v)
def test_stop_signal_aborts_switches_off_and_keeps_the_evidence(ubench, tmp_path, signum, point):
    serial = f"OH-SIG-{signal.Signals(signum).name}-{point}"
    ubench.load_unit(serial)
    events = tmp_path / "ev.jsonl"
    proc = bg("run", TB3, "--station", ubench.station_path, "--serial", serial, "--unattended",
              "--reports", tmp_path / "r", "--events", events, "--clock-speed", SPEED)
    if point == "run_started":
        wait_for(events, proc, event="run_started")
    else:
        wait_for(events, proc, event="step_started", step=point)
    proc.send_signal(signum)
    out, err = proc.communicate(timeout=60)
    code, word = SIGNALS[signum]
    assert proc.returncode == code, (out, err)
    assert ubench.supply_output is False  # asked from the emulated supply itself
    assert "Traceback" not in err
    (row,) = rows(tmp_path / "r" / "results.sqlite")
    assert row[:3] == (serial, 1, "aborted") and word in row[3]
    report = json.loads(Path(row[4]).read_text(encoding="utf-8"))
    assert report["verdict"] == "aborted" and report["reason"] == row[3]
    statuses = [s["status"] for s in report["steps"]]
    if "aborted" in statuses:  # stopped inside a step: at the chosen one or later, nothing after it
        at = statuses.index("aborted")
        if point != "run_started":
            assert at >= STEP_IDS.index(point)
        assert set(statuses[at + 1:]) <= {"skipped"}
    else:  # stopped while the bench was being opened
        assert point == "run_started" and set(statuses) == {"skipped"}
    assert Path(row[4]).with_suffix(".html").exists()
    assert [e["event"] for e in events_of(events)][-1] == "run_finished"


# ---------------------------------------------------------------- one run per station


def test_second_run_on_a_busy_station_touches_nothing(ubench, tmp_path, capsys):
    plan = tmp_path / "tb3-long.yaml"
    text = TB3.read_text(encoding="utf-8")
    assert "    title: Warm up\n    duration: 2 s\n" in text
    plan.write_text(text.replace("    title: Warm up\n    duration: 2 s\n", "    title: Warm up\n    duration: 3600 s\n"),
                    encoding="utf-8")
    ubench.load_unit("OH-LOCK-1")
    events = tmp_path / "ev.jsonl"
    first = bg("run", plan, "--station", ubench.station_path, "--serial", "OH-LOCK-1", "--unattended",
               "--reports", tmp_path / "r1", "--events", events, "--clock-speed", SPEED)
    try:
        wait_for(events, first, event="step_started", step="warm-up")
        assert ubench.supply_output is True
        code = main(["run", str(TB3), "--station", str(ubench.station_path), "--serial", "OH-LOCK-2",
                     "--unattended", "--reports", str(tmp_path / "r2"), "--clock-speed", str(SPEED)])
        captured = capsys.readouterr()
        assert code == 2
        (line,) = captured.err.splitlines()
        assert line.startswith("benchgate: station busy: ") and f"pid {first.pid}" in line
        assert captured.out == ""
        assert ubench.supply_output is True  # the first unit is still powered
        assert not (tmp_path / "r2").exists()  # no report, no database
        assert first.poll() is None
    finally:
        first.send_signal(signal.SIGTERM)
        first.communicate(timeout=60)
    assert first.returncode == 143 and ubench.supply_output is False
    (row,) = rows(tmp_path / "r1" / "results.sqlite")
    assert row[:3] == ("OH-LOCK-1", 1, "aborted")


# ---------------------------------------------------------------- a supply that stops answering


def test_dead_supply_is_given_up_quickly_and_the_operator_is_told(ubench, tmp_path, capsys):
    ubench.load_unit("OH-DEAD-1")
    events = tmp_path / "ev.jsonl"

    def pull_the_cable() -> None:  # once the unit is powered, the supply never answers again
        wait_for(events, None, event="step_started", step="warm-up")
        ubench.faults.scpi.drop("supply", 10**6)

    killer = threading.Thread(target=pull_the_cable, daemon=True)
    killer.start()
    code = main(["run", str(TB3), "--station", str(ubench.station_path), "--serial", "OH-DEAD-1",
                 "--unattended", "--reports", str(tmp_path / "r"), "--events", str(events),
                 "--clock-speed", str(SPEED)])
    killer.join(timeout=5)
    captured = capsys.readouterr()
    assert code == 3
    alarms = [line for line in captured.err.splitlines() if "SWITCH THE SUPPLY OFF BY HAND" in line]
    assert len(alarms) == 1, captured.err
    (row,) = rows(tmp_path / "r" / "results.sqlite")
    assert row[:3] == ("OH-DEAD-1", 1, "error")
    report = json.loads(Path(row[4]).read_text(encoding="utf-8"))
    notes = report["flags"]["safe_state"]
    # waited on once (the timeout, then one resync), never again: one try, given up, then fast
    fails = [n for n in notes if n.startswith("supply output off failed")]
    assert len(fails) == 1 and "given up" in fails[0]
    assert any(n.startswith("SWITCH THE SUPPLY OFF BY HAND") for n in notes)


# ---------------------------------------------------------------- serial numbers


@pytest.mark.parametrize("serial", ["", "  "])
def test_blank_serial_is_refused_in_one_line(tmp_path, capsys, serial):
    station = tmp_path / "station.yaml"
    station.write_text("station: s\ninstruments:\n  supply:\n    kind: scpi-supply\n"
                       "    resource: \"TCPIP0::127.0.0.1::9::SOCKET\"\n  adc:\n    kind: serial-adc\n"
                       "    port: /dev/benchgate-none\n    channels: [out]\n    bits: 12\n    vref: 3.3 V\n",
                       encoding="utf-8")
    code = main(["run", str(TB3), "--station", str(station), "--serial", serial, "--reports", str(tmp_path / "r")])
    err = capsys.readouterr().err
    assert code == 2 and err.splitlines() == ["benchgate: the serial number is empty; give the unit's serial number"]
    assert not (tmp_path / "r").exists()
