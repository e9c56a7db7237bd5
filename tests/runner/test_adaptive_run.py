"""An adaptive capture step on the understudy bench: stops early on a good unit, runs to the
longest capture on a unit near a limit, and says so in the record, report and database."""

from __future__ import annotations

import json
import sqlite3

import jsonschema
import pytest

from benchgate.judge.rules import Verdict
from benchgate.plan import loads_plan
from benchgate.runner.options import RunOptions
from benchgate.runner.session import Runner

SPEED = 5.0

PLAN = """plan: tb3-adaptive
version: "1"
product: TB-3 tone board
requires: [adc, supply]
decision: guarded
defaults:
  capture: {instrument: adc, channel: out, rate: 50 kS/s}
steps:
  - id: setup
    kind: supply
    title: Supply 9 V
    voltage: 9 V
    current_limit: 50 mA
    output: on
  - id: warm
    kind: wait
    title: Warm up
    duration: 600 ms
  - id: tone
    kind: capture
    title: Tone
    adaptive: {shortest: 100 ms, longest: 1 s, block: 100 ms}
    checks:
      frequency: {FREQ}
      amplitude: {min: 0.3 V, max: 2.5 V}
  - id: power-off
    kind: supply
    title: Switch off
    output: off
"""


@pytest.fixture(scope="module")
def ubench(tmp_path_factory):
    from benchgate.sim.bench import UnderstudyBench

    with UnderstudyBench("tb3", speed=SPEED, workdir=tmp_path_factory.mktemp("ab")) as vb:
        yield vb


def run(vb, tmp_path, freq: str, serial: str = "OH-AD-1"):
    from benchgate.instruments.station import load_station

    plan = loads_plan(PLAN.replace("{FREQ}", freq), "adaptive.yaml")
    options = RunOptions(reports_dir=tmp_path / "reports", unattended=True, clock=vb.clock)
    with Runner(plan, load_station(vb.station_path), options) as runner:
        vb.load_unit(serial, None)
        out = runner.run(serial)
    assert vb.supply_output is False
    return out, options


def test_good_unit_stops_at_the_first_look(ubench, tmp_path):
    out, options = run(ubench, tmp_path, "{min: 700 Hz, max: 1.2 kHz}")
    rec = out.record
    assert rec.verdict is Verdict.PASS, rec.reason
    tone = next(s for s in rec.steps if s.id == "tone")
    story = tone.capture.metadata["adaptive"]
    assert "every check decided at 0.1 s" in story["stopped"]
    assert tone.capture.samples == pytest.approx(5000, abs=5)  # 100 ms at 50 kS/s, not 1 s
    assert set(story["looks"]) == {"frequency", "amplitude"}
    assert all(c.risk is not None and c.risk < 1e-6 for c in rec.checks())  # far inside: tiny risk
    body = json.loads(out.paths["json"].read_text())
    from benchgate.report.json_report import load_schema

    jsonschema.validate(body, load_schema())
    html = out.paths["html"].read_text()
    assert "Adaptive capture:</strong> every check decided at 0.1 s" in html and "→ pass" in html
    conn = sqlite3.connect(options.database)
    seconds = [r[0] for r in conn.execute("SELECT record_seconds FROM checks")]
    conn.close()
    assert seconds == [pytest.approx(0.1, abs=1e-3)] * 2


def test_unit_near_a_limit_runs_to_the_longest_record(ubench, tmp_path):
    from benchgate.sim.boards import draw_unit

    f = draw_unit("tb3", "OH-AD-2").steady_frequency()
    # a window edge 0.02 Hz from the unit's frequency: no look can decide it before the end
    out, _ = run(ubench, tmp_path, f"{{min: 700 Hz, max: {f + 0.02:.3f} Hz}}", serial="OH-AD-2")
    tone = next(s for s in out.record.steps if s.id == "tone")
    story = tone.capture.metadata["adaptive"]
    assert "longest capture 1 s reached" in story["stopped"]
    assert 2 <= len(story["looks"]["frequency"]) <= 10  # looks passed during an analysis are skipped
    assert all(lk["decided"] is None for lk in story["looks"]["frequency"])
    assert tone.capture.samples == pytest.approx(50_000, abs=50)
    assert [lk["uncertainty"] for lk in story["looks"]["frequency"]][-1] < story["looks"]["frequency"][0]["uncertainty"]
