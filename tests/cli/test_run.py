"""``benchgate run``: usage errors, unreachable instruments, and full runs on the understudy bench."""

from __future__ import annotations

import json
import os
import signal
import sqlite3
import subprocess
import sys
from pathlib import Path

import pytest

from benchgate.cli import main
from waiting import wait_until

REPO = Path(__file__).resolve().parents[2]
TB3 = REPO / "testplans" / "tb3.yaml"
SPEED = 5.0

DEAD_STATION = """\
station: dead-bench
instruments:
  adc:
    kind: serial-adc
    port: /dev/benchgate-no-such-port
    baudrate: 115200
    protocol: framed
    channels: [out]
    bits: 12
    vref: 3.3 V
    identify_timeout: 0.2 s
    timeout: 0.2 s
  supply:
    kind: scpi-supply
    resource: "TCPIP0::127.0.0.1::9::SOCKET"
    timeout: 0.3 s
"""


def valid_report(path):
    """The unit report at ``path``, checked against the repository's JSON Schema."""
    import jsonschema

    from benchgate.report.json_report import load_schema

    data = json.loads(Path(path).read_text())
    jsonschema.Draft202012Validator(load_schema()).validate(data)
    return data


def rows(db):
    conn = sqlite3.connect(db)
    try:
        return conn.execute("SELECT serial, complete, verdict, reason, report_path FROM runs").fetchall()
    finally:
        conn.close()


def test_missing_station_file_is_a_usage_error(tmp_path, capsys):
    code = main(["run", str(TB3), "--station", str(tmp_path / "nope.yaml"), "--serial", "S1",
                 "--reports", str(tmp_path)])
    err = capsys.readouterr().err
    assert code == 2 and "nope.yaml" in err and err.startswith("benchgate: ")
    assert "Traceback" not in err


def test_station_without_a_required_role_is_refused_before_anything(tmp_path, capsys):
    station = tmp_path / "station.yaml"
    station.write_text(DEAD_STATION.split("  supply:")[0])  # adc only; the plan needs a supply
    code = main(["run", str(TB3), "--station", str(station), "--serial", "S1", "--reports", str(tmp_path)])
    err = capsys.readouterr().err
    assert code == 2 and "supply" in err
    assert not (tmp_path / "results.sqlite").exists()  # nothing touched, nothing recorded


def test_unattended_needs_a_serial(tmp_path, capsys):
    station = tmp_path / "station.yaml"
    station.write_text(DEAD_STATION)
    code = main(["run", str(TB3), "--station", str(station), "--unattended", "--reports", str(tmp_path)])
    assert code == 2 and "--serial" in capsys.readouterr().err


def test_unreachable_instrument_is_error_with_report_and_row(tmp_path, capsys):
    station = tmp_path / "station.yaml"
    station.write_text(DEAD_STATION)
    code = main(["run", str(TB3), "--station", str(station), "--serial", "DEAD-1", "--unattended",
                 "--reports", str(tmp_path / "r"), "--junit", str(tmp_path / "j.xml")])
    assert code == 3
    (row,) = rows(tmp_path / "r" / "results.sqlite")
    assert row[:3] == ("DEAD-1", 1, "error")
    report = valid_report(row[4])
    assert report["verdict"] == "error" and report["reason"] == row[3]
    assert (tmp_path / "j.xml").exists()


# ---------------------------------------------------------------- on the understudy bench


@pytest.fixture
def ubench(tmp_path):
    from benchgate.sim.bench import UnderstudyBench

    with UnderstudyBench("tb3", speed=SPEED, workdir=tmp_path / "vb") as vb:
        yield vb


@pytest.fixture
def ubench_real_time(tmp_path):
    # For runs whose own clock is real time (no --clock-speed): the bench must run in real time
    # too, or its ADC truly delivers faster than it declares and the capture is refused.
    from benchgate.sim.bench import UnderstudyBench

    with UnderstudyBench("tb3", speed=1.0, workdir=tmp_path / "vb") as vb:
        yield vb


def bg(*args, env=None, **kw):
    """``benchgate`` as a separate process (the way an operator or a CI job starts it)."""
    full_env = {k: v for k, v in os.environ.items() if k != "CI"}
    full_env.update(env or {})
    return subprocess.Popen([sys.executable, "-m", "benchgate", *map(str, args)], env=full_env,
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True, **kw)


def wait_for_event(path, event, step, proc, timeout=60.0):
    def found():
        if path.exists():
            # complete lines only: the run may be half-way through writing the last one
            for line in path.read_text(encoding="utf-8").splitlines(keepends=True):
                if not line.endswith("\n"):
                    break
                e = json.loads(line)
                if e["event"] == event and e.get("step") == step:
                    return e
        return None

    def ended():
        return None if proc.poll() is None else f"benchgate ended early: {proc.communicate()}"

    return wait_until(found, timeout=timeout, what=f"{event} for {step}", abandon=ended)


def test_good_unit_in_process_with_junit_and_events(ubench, tmp_path, capsys):
    ubench.load_unit("OH-CLI-1")
    junit, events = tmp_path / "ci" / "junit.xml", tmp_path / "ev.jsonl"
    code = main(["run", str(TB3), "--station", str(ubench.station_path), "--serial", "OH-CLI-1",
                 "--unattended", "--reports", str(tmp_path / "r"), "--clock-speed", str(SPEED),
                 "--junit", str(junit), "--events", str(events), "--operator", "Wren", "--lot", "L7"])
    out = capsys.readouterr().out
    assert code == 0, out
    assert "[3/7] power-on" in out and "PASS" in out and "\x1b[" not in out  # plain: not a terminal
    assert ubench.supply_output is False
    import xml.etree.ElementTree as ET

    from benchgate.plan import load_plan

    n_checks = sum(len(getattr(s, "checks", ())) for s in load_plan(TB3).steps)
    suite = ET.parse(junit).getroot().find("testsuite")
    assert suite.get("tests") == str(n_checks) and suite.get("failures") == "0" and suite.get("errors") == "0"
    names = [(c.get("classname"), c.get("name")) for c in suite.findall("testcase")]
    assert ("tb3-final.steady", "thd") in names
    kinds = [json.loads(line)["event"] for line in events.read_text().splitlines()]
    assert kinds[0] == "run_started" and kinds[-1] == "run_finished" and kinds.count("check") == n_checks
    (row,) = rows(tmp_path / "r" / "results.sqlite")
    assert row[:3] == ("OH-CLI-1", 1, "pass")
    report = valid_report(row[4])
    assert report["operator"] == "Wren" and report["lot"] == "L7" and report["flags"]["unattended"] is True


def test_ci_true_without_terminal_implies_unattended(ubench, tmp_path):
    ubench.load_unit("OH-CI-1")
    proc = bg("run", TB3, "--station", ubench.station_path, "--serial", "OH-CI-1", "--reports",
              tmp_path / "r", "--clock-speed", SPEED, env={"CI": "true"}, stdin=subprocess.DEVNULL)
    out, err = proc.communicate(timeout=120)
    assert proc.returncode == 0, (out, err)
    (row,) = rows(tmp_path / "r" / "results.sqlite")
    report = json.loads(Path(row[4]).read_text())
    assert report["flags"]["unattended"] is True
    assert report["steps"][1]["answer"] == "yes"  # the plan's unattended_answer


def test_unattended_prompt_without_scripted_answer_is_error(ubench, tmp_path):
    text = TB3.read_text()
    assert "    unattended_answer: yes\n" in text
    plan = tmp_path / "tb3-no-script.yaml"
    plan.write_text(text.replace("    unattended_answer: yes\n", ""))
    ubench.load_unit("OH-NS-1")
    proc = bg("run", plan, "--station", ubench.station_path, "--serial", "OH-NS-1", "--unattended",
              "--reports", tmp_path / "r", "--clock-speed", SPEED, stdin=subprocess.DEVNULL)
    out, err = proc.communicate(timeout=120)
    assert proc.returncode == 3, (out, err)
    assert ubench.supply_output is False
    (row,) = rows(tmp_path / "r" / "results.sqlite")
    assert row[1:3] == (1, "error")
    assert "unattended_answer" in row[3] and "connect" in row[3]
    assert "Traceback" not in err


def test_batch_reads_serials_until_empty_line(ubench, tmp_path):
    proc = bg("run", TB3, "--station", ubench.station_path, "--batch", "--unattended", "--reports",
              tmp_path / "r", "--clock-speed", SPEED, stdin=subprocess.PIPE)
    out, err = proc.communicate("OH-B-1\r\nOH-B-2\n\nOH-B-never\n", timeout=120)
    assert proc.returncode == 0, (out, err)
    assert "tally: 2 units — 2 pass" in out
    assert sorted(r[0] for r in rows(tmp_path / "r" / "results.sqlite")) == ["OH-B-1", "OH-B-2"]


def test_sigint_aborts_with_report_supply_off_and_complete_row(ubench_real_time, tmp_path):
    ubench_real_time.load_unit("OH-INT-1")
    events = tmp_path / "ev.jsonl"
    # the run's own clock is real time here, so the 2 s warm-up leaves room to interrupt it
    proc = bg("run", TB3, "--station", ubench_real_time.station_path, "--serial", "OH-INT-1", "--unattended",
              "--reports", tmp_path / "r", "--events", events, stdin=subprocess.DEVNULL)
    wait_for_event(events, "step_started", "warm-up", proc)
    assert ubench_real_time.supply_output is True  # the unit is powered while it warms up
    proc.send_signal(signal.SIGINT)
    out, err = proc.communicate(timeout=60)
    assert proc.returncode == 130, (out, err)
    assert ubench_real_time.supply_output is False
    (row,) = rows(tmp_path / "r" / "results.sqlite")
    assert row[:3] == ("OH-INT-1", 1, "aborted")
    report = valid_report(row[4])
    assert report["verdict"] == "aborted" and "Ctrl-C" in report["reason"]
    assert [s["status"] for s in report["steps"]][4:] == ["aborted", "skipped", "skipped"]
    assert Path(row[4]).with_suffix(".html").exists()
    assert "Traceback" not in err


def test_sigint_during_a_capture_switches_off_and_aborts(tmp_path):
    from benchgate.sim.bench import UnderstudyBench

    # a slow bench: the 0.4 s start-up capture takes 0.8 s of wall time
    with UnderstudyBench("tb3", speed=0.5, workdir=tmp_path / "vb") as vb:
        vb.load_unit("OH-INT-3")
        events = tmp_path / "ev.jsonl"
        proc = bg("run", TB3, "--station", vb.station_path, "--serial", "OH-INT-3", "--unattended",
                  "--reports", tmp_path / "r", "--events", events, "--clock-speed", 0.5,
                  stdin=subprocess.DEVNULL)
        wait_for_event(events, "step_started", "power-on", proc)
        wait_until(lambda: vb.supply_output, timeout=5, what="supply switched on")
        assert vb.supply_output is True  # switched on once the acquisition was running
        proc.send_signal(signal.SIGINT)
        out, err = proc.communicate(timeout=60)
        assert proc.returncode == 130, (out, err)
        assert vb.supply_output is False
    (row,) = rows(tmp_path / "r" / "results.sqlite")
    assert row[1:3] == (1, "aborted")
    report = json.loads(Path(row[4]).read_text())
    assert report["steps"][2]["status"] == "aborted" and "power-on" in report["reason"]


def test_second_sigint_during_cleanup_still_leaves_supply_off(ubench_real_time, tmp_path):
    ubench_real_time.load_unit("OH-INT-2")
    events = tmp_path / "ev.jsonl"
    proc = bg("run", TB3, "--station", ubench_real_time.station_path, "--serial", "OH-INT-2", "--unattended",
              "--reports", tmp_path / "r", "--events", events, stdin=subprocess.DEVNULL)
    wait_for_event(events, "step_started", "warm-up", proc)
    proc.send_signal(signal.SIGINT)

    def pester() -> bool:  # an impatient operator: Ctrl-C again at every look until it ends
        if proc.poll() is not None:
            return True
        try:
            proc.send_signal(signal.SIGINT)
        except ProcessLookupError:
            return True
        return False

    wait_until(pester, timeout=30, what="benchgate ends under repeated Ctrl-C")
    out, err = proc.communicate(timeout=60)
    assert proc.returncode == 130, (out, err)
    assert ubench_real_time.supply_output is False
    (row,) = rows(tmp_path / "r" / "results.sqlite")
    assert row[1:3] == (1, "aborted")


def test_kill_9_leaves_an_incomplete_row(ubench_real_time, tmp_path, capsys):
    ubench_real_time.load_unit("OH-KILL-1")
    events = tmp_path / "ev.jsonl"
    proc = bg("run", TB3, "--station", ubench_real_time.station_path, "--serial", "OH-KILL-1", "--unattended",
              "--reports", tmp_path / "r", "--events", events, stdin=subprocess.DEVNULL)
    wait_for_event(events, "step_started", "warm-up", proc)
    proc.kill()
    proc.communicate(timeout=30)
    (row,) = rows(tmp_path / "r" / "results.sqlite")
    assert row[:3] == ("OH-KILL-1", 0, None)  # begun, never finished: visible, not missing
    code = main(["history", "OH-KILL-1", "--db", str(tmp_path / "r" / "results.sqlite")])
    out = capsys.readouterr().out
    assert code == 0 and "OH-KILL-1" in out and "incomplete" in out.lower()


def test_hazards_need_accept_flag_when_unattended_and_are_recorded(ubench, tmp_path, capsys):
    text = TB3.read_text()
    assert "hazards: []" in text
    plan = tmp_path / "tb3-hot.yaml"
    plan.write_text(text.replace("hazards: []", "hazards:\n  - name: hot_surfaces\n"
                                 "    text: The regulator <U1> reaches 70 °C; let it cool before handling."))
    base = ["run", str(plan), "--station", str(ubench.station_path), "--serial", "OH-HOT-1", "--unattended",
            "--reports", str(tmp_path / "r"), "--clock-speed", str(SPEED), "--display", "quiet"]
    assert main(base) == 2
    assert "--accept-hazards" in capsys.readouterr().err
    assert not (tmp_path / "r" / "results.sqlite").exists()
    ubench.load_unit("OH-HOT-1")
    assert main(base + ["--accept-hazards"]) == 0
    (row,) = rows(tmp_path / "r" / "results.sqlite")
    report = valid_report(row[4])
    assert report["hazards_acknowledged"] == "accepted in advance for this run"
    assert report["hazards"] == ["hot_surfaces: The regulator <U1> reaches 70 °C; let it cool before handling."]
    conn = sqlite3.connect(tmp_path / "r" / "results.sqlite")
    assert conn.execute("SELECT accept_hazards FROM runs").fetchone() == (1,)
    conn.close()


def test_expired_calibration_stops_the_run_unless_allowed(ubench, tmp_path, capsys):
    import re

    text = ubench.station_path.read_text()
    text, n = re.subn(r"(out: \{gain: 1\.0, offset: 0 mV, )date: [0-9-]+, due: [0-9-]+",
                      r"\1date: 2020-01-01, due: 2021-01-01", text)
    assert n == 1
    station = tmp_path / "expired.yaml"
    station.write_text(text)
    base = ["run", str(TB3), "--station", str(station), "--serial", "OH-CAL-1", "--unattended",
            "--reports", str(tmp_path / "r"), "--clock-speed", str(SPEED), "--display", "quiet"]
    assert main(base) == 2
    err = capsys.readouterr().err
    assert "adc (channel out) calibration was due 2021-01-01" in err and str(station) in err
    assert ubench.supply_output is False and not (tmp_path / "r" / "results.sqlite").exists()
    ubench.load_unit("OH-CAL-1")
    assert main(base + ["--allow-expired-calibration"]) == 0
    (row,) = rows(tmp_path / "r" / "results.sqlite")
    report = valid_report(row[4])
    assert report["flags"]["allow_expired_calibration"] is True
    assert report["flags"]["expired_calibration"] == ["adc (channel out) calibration was due 2021-01-01"]
    conn = sqlite3.connect(tmp_path / "r" / "results.sqlite")
    assert conn.execute("SELECT allow_expired_calibration FROM runs").fetchone() == (1,)
    conn.close()


def test_attended_run_asks_serial_and_prompt_and_hazard(ubench, tmp_path):
    text = TB3.read_text().replace("hazards: []", "hazards:\n  - name: hot_surfaces\n"
                                   "    text: The regulator gets hot.")
    plan = tmp_path / "tb3-attended.yaml"
    plan.write_text(text)
    ubench.load_unit("OH-ATT-1")
    proc = bg("run", plan, "--station", ubench.station_path, "--reports", tmp_path / "r",
              "--clock-speed", SPEED, stdin=subprocess.PIPE)
    # the hazard's name (acknowledged before anything), the serial as a scanner types it, then
    # "y" to the connect question
    out, err = proc.communicate("hot_surfaces\nOH-ATT-1\r\ny\n", timeout=120)
    assert proc.returncode == 0, (out, err)
    assert "HAZARD hot_surfaces: The regulator gets hot." in out and "[y/n]" in out
    (row,) = rows(tmp_path / "r" / "results.sqlite")
    report = valid_report(row[4])
    assert report["serial"] == "OH-ATT-1" and report["hazards_acknowledged"] == "typed by operator"
    assert report["steps"][1]["answer"] == "yes" and report["flags"]["unattended"] is False
