"""``benchgate inspect PLAN [--json]``."""

from __future__ import annotations

import json
import math
import subprocess
import sys
from pathlib import Path

import pytest

from benchgate.cli import main

ROOT = Path(__file__).resolve().parents[2]
PLANS = ROOT / "testplans"


@pytest.mark.parametrize("name", ["tb3", "wo1", "pf2"])
def test_json_shape(name, capsys):
    code = main(["inspect", str(PLANS / f"{name}.yaml"), "--json"])
    out, err = capsys.readouterr()
    assert code == 0 and err == ""
    data = json.loads(out)
    assert data["errors"] == []
    assert set(data) >= {"plan", "version", "hash", "steps", "errors", "cautions", "hazards", "requires", "decision"}
    assert len(data["hash"]) == 64 and data["version"] == "1.0"
    for step in data["steps"]:
        assert set(step) >= {"id", "kind", "checks"}
        for ch in step["checks"]:
            assert set(ch) >= {"measurement", "unit", "nominal", "low", "high", "derived_from"}
    freq = [c for s in data["steps"] for c in s["checks"] if c["measurement"] == "frequency"]
    assert freq and all(c["unit"] == "Hz" and c["low"] < c["nominal"] < c["high"] for c in freq)
    assert all("tolerance corners" in c["derived_from"] for c in freq)
    mc = freq[0]["monte_carlo"]
    assert mc["draws"] >= 10_000 and freq[0]["low"] <= mc["min"] <= mc["max"] <= freq[0]["high"]


def test_tb3_numbers(capsys):
    main(["inspect", str(PLANS / "tb3.yaml"), "--json"])
    data = json.loads(capsys.readouterr().out)
    steady = next(s for s in data["steps"] if s["id"] == "steady")
    f = steady["checks"][0]
    # handbook formula (docs/references.md): 1/(2πRC√6) = 955.5 Hz for R = 6k8, C = 10n; the
    # amplifier's source and load resistance pull the design value a little below it
    ideal = 1 / (2 * math.pi * 6800 * 10e-9 * math.sqrt(6))
    assert 0.95 * ideal < f["nominal"] < ideal
    assert f["gain_needed"]["nominal"] > 29.0  # the loaded ladder attenuates more than 1/29
    assert f["low_corner"] == {k: "+" for k in ("R1", "R2", "R3", "C1", "C2", "C3", "source", "load")}
    cur = next(s for s in data["steps"] if s["id"] == "supply-current")["checks"][0]
    assert (cur["unit"], cur["low"], cur["high"]) == ("A", 0.002, 0.008)


def test_text_output(capsys):
    code = main(["inspect", str(PLANS / "tb3.yaml")])
    out = capsys.readouterr().out
    assert code == 0
    for text in ("tb3-final", "cautions:", "supply-current", "940.7 Hz", "256 tolerance corners",
                 "gain needed 34.11", "Monte Carlo 20000 draws", "plan is valid"):
        assert text in out


def test_errors_plain(tmp_path, capsys):
    p = tmp_path / "bad.yaml"
    p.write_text("plan: x\nversion: 1\nproduct: p\nsteps:\n  - id: a\n    kind: suply\n    title: t\n")
    code = main(["inspect", str(p)])
    out, err = capsys.readouterr()
    assert code == 2 and out == ""
    assert err.strip() == f"benchgate: {p}:6:11: steps[0].kind: unknown value 'suply'; expected one of " \
                          "supply, wait, prompt, capture, reading, tone, sweep, level_sweep; did you mean 'supply'?"


def test_errors_json(capsys):
    p = ROOT / "tests" / "plan" / "broken" / "many_errors.yaml"
    code = main(["inspect", str(p), "--json"])
    out, err = capsys.readouterr()
    assert code == 2
    data = json.loads(out)
    assert len(data["errors"]) == 3 and data["plan"] is None and data["steps"] == []
    assert err.strip().splitlines() == [f"benchgate: {e}" for e in data["errors"]]


def test_missing_file(tmp_path, capsys):
    code = main(["inspect", str(tmp_path / "nope.yaml")])
    assert code == 2
    assert capsys.readouterr().err.strip() == f"benchgate: {tmp_path / 'nope.yaml'}: no such file"


def test_notes_shown(tmp_path, capsys):
    text = (PLANS / "wo1.yaml").read_text().replace("R1: 16k ±1%", "R1: 16k3 ±1%", 1)
    p = tmp_path / "wo1.yaml"
    p.write_text(text)
    assert main(["inspect", str(p)]) == 0
    out = capsys.readouterr().out
    assert "note:" in out and "not an E96 value" in out


def test_subprocess_entry_point():
    r = subprocess.run([sys.executable, "-m", "benchgate", "inspect", str(PLANS / "pf2.yaml"), "--json"],
                       capture_output=True, text=True, timeout=60)
    assert r.returncode == 0, r.stderr
    assert json.loads(r.stdout)["plan"] == "pf2-final"


def test_rich_table_on_a_terminal(capsys, monkeypatch):
    monkeypatch.setattr(sys.stdout, "isatty", lambda: True)
    monkeypatch.setenv("COLUMNS", "160")
    assert main(["inspect", str(PLANS / "tb3.yaml")]) == 0
    out = capsys.readouterr().out
    for text in ("[capture]", "940.7 Hz", "789.0 Hz", "1.135 kHz", "256 tolerance corners",
                 "gain needed 34.11", "plan is valid"):
        assert text in out, text
