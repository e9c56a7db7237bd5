"""`benchgate check` on plans with generator-driven steps (text and JSON)."""

from __future__ import annotations

import json
from pathlib import Path

from benchgate.cli import main

REPO = Path(__file__).resolve().parents[2]


def test_inspect_shows_the_stimulus_and_derived_windows(capsys):
    assert main(["inspect", str(REPO / "testplans" / "aa1.yaml")]) == 0
    out = capsys.readouterr().out
    assert "generator 1.000 kHz at 0.2 Vpp; recorded on digitizer:in+out" in out
    assert "rc_filter highpass: worst case over 4 tolerance corners" in out
    assert "8 levels 0.1 … 1 Vpp" in out


def test_inspect_json_is_json(capsys):
    assert main(["inspect", "--json", str(REPO / "testplans" / "lp2.yaml")]) == 0
    data = json.loads(capsys.readouterr().out)
    sweep = [s for s in data["steps"] if s["kind"] == "sweep"][0]
    assert sweep["settings"]["points_per_decade"] == 8
