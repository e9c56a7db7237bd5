"""``benchgate run``: usage errors, unreachable instruments, and full runs on the virtual bench."""

from __future__ import annotations

import json
import os
import signal
import sqlite3
import subprocess
import sys
import time
from pathlib import Path

import pytest

from benchgate.cli import main

REPO = Path(__file__).resolve().parents[2]
TB3 = REPO / "testplans" / "tb3.yaml"

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
    report = json.loads(Path(row[4]).read_text())
    assert report["verdict"] == "error" and report["reason"] == row[3]
    assert (tmp_path / "j.xml").exists()
