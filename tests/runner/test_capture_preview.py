"""Previews of a capture being taken reach the attendant (``capture_preview``) on every capture
path of the runner: streaming, start-up with a streaming recorder, adaptive, and a digitizer."""

from __future__ import annotations

from pathlib import Path

import pytest
from test_adaptive_run import PLAN as ADAPTIVE_PLAN
from test_understudy_bench import DIGITIZER_PLAN

from benchgate.judge.rules import Verdict
from benchgate.plan import loads_plan
from benchgate.runner.attendant import Silent
from benchgate.runner.options import RunOptions
from benchgate.runner.session import Runner

TB3 = Path(__file__).resolve().parents[2] / "testplans" / "tb3.yaml"
SPEED = 2.0


class Watching(Silent):
    """Keeps (step, samples so far, samples asked for) of every preview, and when checks landed."""

    def __init__(self) -> None:
        self.step = ""
        self.events: list[tuple[str, str, int, int]] = []

    def step_started(self, index, total, step):
        self.step = step.id

    def capture_preview(self, preview):
        self.events.append(("preview", self.step, preview.received, preview.expected))

    def check(self, check):
        self.events.append(("check", check.step_id, 0, 0))

    def previews(self, step: str) -> list[tuple[int, int]]:
        return [(r, e) for kind, s, r, e in self.events if kind == "preview" and s == step]


@pytest.fixture(scope="module")
def ubench(tmp_path_factory):
    from benchgate.sim.bench import UnderstudyBench

    with UnderstudyBench("tb3", speed=SPEED, workdir=tmp_path_factory.mktemp("pv")) as vb:
        yield vb


def run(vb, tmp_path, text: str) -> tuple[Watching, object]:
    from benchgate.instruments.station import load_station

    face = Watching()
    options = RunOptions(reports_dir=tmp_path / "reports", unattended=True, clock=vb.clock)
    with Runner(loads_plan(text, "plan.yaml"), load_station(vb.station_path), options, attendant=face) as r:
        vb.load_unit("OH-PV-1", None)
        outcome = r.run("OH-PV-1")
    assert vb.supply_output is False
    return face, outcome


def test_streaming_captures_preview_while_recording(ubench, tmp_path):
    text = TB3.read_text(encoding="utf-8")
    head, tail = text.split("  - id: steady", 1)
    text = head + "  - id: steady" + tail.replace("duration: 500 ms", "duration: 1.5 s", 1)
    face, outcome = run(ubench, tmp_path, text)
    assert outcome.record.verdict is Verdict.PASS, outcome.record.reason
    steady = face.previews("steady")
    assert len(steady) >= 3 and all(e == 75_000 for _, e in steady)  # 1.5 s at 50 kS/s
    received = [r for r, _ in steady]
    assert received == sorted(received) and received[-1] < 75_000
    # every preview came before the capture's checks, i.e. while it was being taken
    last_preview = max(i for i, ev in enumerate(face.events) if ev[:2] == ("preview", "steady"))
    first_check = min(i for i, ev in enumerate(face.events) if ev[:2] == ("check", "steady"))
    assert last_preview < first_check
    assert face.previews("power-on")  # the start-up capture (recorded on a worker thread) too


def test_an_adaptive_capture_previews_too(ubench, tmp_path):
    face, outcome = run(ubench, tmp_path, ADAPTIVE_PLAN.replace("{FREQ}", "{min: 700 Hz, max: 1.2 kHz}"))
    assert outcome.record.verdict is Verdict.PASS, outcome.record.reason
    assert face.previews("tone") and {e for _, e in face.previews("tone")} == {50_000}  # up to the longest


def test_a_digitizer_start_up_previews_nothing_then_its_record(ubench, tmp_path):
    face, outcome = run(ubench, tmp_path, DIGITIZER_PLAN)
    assert outcome.record.verdict is Verdict.PASS, outcome.record.reason
    assert face.previews("power-on") == [(0, 20_000), (20_000, 20_000)]
