"""The operator page's parts without a browser: questions, Stop, tally, capture picture, defects."""

from __future__ import annotations

import threading
from types import SimpleNamespace

import numpy as np
import pytest

from benchgate.cli.serve import defect_in
from benchgate.web.face import PageFace, Stop
from benchgate.web.lot import DETAIL_SAMPLES, WAVE_COLUMNS, Tally, wave_picture
from benchgate.web.state import Board

PLAN = SimpleNamespace(hazards=(SimpleNamespace(name="mains", text="Live parts at 230 V."),
                                SimpleNamespace(name="hot_surfaces", text="The heatsink gets hot.")),
                       steps=())


class Asker:
    """Runs one question of ``face`` in a thread (as the runner does) and waits for the page's
    question."""

    def __init__(self, face: PageFace, question):
        self.face = face
        self.result: dict = {}
        self.asked = threading.Event()
        self.thread = threading.Thread(target=self._run, args=(question,), daemon=True)
        self._watch = face.board.change

        def change(fn):
            self._watch(fn)
            if face.board.get("ask") is not None:
                self.asked.set()
        face.board.change = change
        self.thread.start()
        assert self.asked.wait(10), "the question never reached the page"

    def _run(self, question) -> None:
        try:
            self.result["answer"] = question(self.face)
        except BaseException as exc:  # noqa: BLE001 - handed to the test
            self.result["error"] = exc

    def done(self) -> dict:
        self.thread.join(10)
        assert not self.thread.is_alive()
        return self.result


@pytest.fixture
def face():
    return PageFace(Board(), Stop(), PLAN)


def test_a_yes_no_question_takes_one_answer(face):
    asker = Asker(face, lambda f: f.ask_yes_no("Is the LED lit?"))
    question = face.board.get("ask")
    assert question["kind"] == "yesno" and question["text"] == "Is the LED lit?"
    assert not face.answer(question["id"] + 1, "y")  # an answer to another question is refused
    assert face.answer(question["id"], "y")
    assert not face.answer(question["id"], "n")  # answered once only
    assert asker.done() == {"answer": True}
    assert face.board.get("ask") is None


@pytest.mark.parametrize("question, kind, text", [
    (lambda f: f.wait_until_done("Clip the probe to OUT."), "done", "Clip the probe to OUT."),
    (lambda f: f.ask_retry("Re-seat the board.").yes, "retry", "Re-seat the board.")])
def test_other_questions(face, question, kind, text):
    asker = Asker(face, question)
    asked = face.board.get("ask")
    assert asked["kind"] == kind and asked["text"] == text
    face.answer(asked["id"], "")
    assert "error" not in asker.done()


def test_hazards_are_asked_one_by_one_and_acknowledged_as_preflight_expects(face):
    from benchgate.runner.options import RunOptions
    from benchgate.runner.preflight import acknowledge_hazards

    def preflight():
        return acknowledge_hazards(PLAN, RunOptions(), face)
    result: dict = {}

    def run() -> None:
        try:
            result["ack"] = preflight()
        except BaseException as exc:  # noqa: BLE001
            result["error"] = exc

    seen = []
    original = face.board.change

    def change(fn):
        original(fn)
        q = face.board.get("ask")
        if q is not None and (not seen or seen[-1]["id"] != q["id"]):
            seen.append(q)
            face.answer(q["id"], "acknowledge")
    face.board.change = change
    worker = threading.Thread(target=run)
    worker.start()
    worker.join(10)
    assert isinstance(result.get("ack"), str) and result["ack"], result
    assert [(q["hazard"], q["index"], q["count"]) for q in seen] == [("mains", 1, 2), ("hot_surfaces", 2, 2)]
    assert [(m["kind"], m["text"]) for m in face.board.get("messages")] == [
        ("hazard", "mains: Live parts at 230 V."), ("hazard", "hot_surfaces: The heatsink gets hot.")]


def _answering(face: PageFace, answer: str, kinds: list) -> None:
    """Let the page answer every question ``face`` puts up with ``answer``."""
    original = face.board.change

    def change(fn):
        original(fn)
        q = face.board.get("ask")
        if q is not None:
            kinds.append(q["kind"])
            face.answer(q["id"], answer)
    face.board.change = change


@pytest.mark.parametrize("call, answer, expected, kind", [
    (lambda f: f.ask_yes_no("Is the LED lit?"), "n", False, "yesno"),
    (lambda f: f.ask_yes_no("Is the LED lit?"), "y", True, "yesno"),
    (lambda f: f.wait_until_done("Clip the probe."), "ok", "ok", "done"),
    (lambda f: f.acknowledge("hot_surfaces", "The heatsink gets hot."), "acknowledge", True, "hazard"),
    (lambda f: f.acknowledge("mains", "Live parts."), "decline", False, "hazard"),
    (lambda f: f.ask_retry("Re-seat the board.").yes, "n", False, "retry"),
    (lambda f: f.ask_retry("Re-seat the board.").yes, "", True, "retry"),
])
def test_the_typed_questions(face, call, answer, expected, kind):
    kinds: list = []
    _answering(face, answer, kinds)
    result: dict = {}
    worker = threading.Thread(target=lambda: result.update(v=call(face)))
    worker.start()
    worker.join(10)
    assert result == {"v": expected} and kinds == [kind]


def _record(serial, verdict, failed=()):
    checks = [SimpleNamespace(step_id=s, measurement=m, verdict=SimpleNamespace(value="fail")) for s, m in failed]
    return SimpleNamespace(serial=serial, verdict=SimpleNamespace(value=verdict), reason="r",
                           checks=lambda: checks)


def test_tally_counts_units_first_pass_yield_and_the_most_frequent_failure():
    t = Tally()
    assert t.to_dict() == {"tested": 0, "passed": 0, "fpy": None, "runs": 0, "top_failure": None}
    t.add(_record("A", "fail", [("steady", "thd"), ("steady", "thd_n")]))
    t.add(_record("A", "pass"))
    t.add(_record("B", "pass"))
    t.add(_record("C", "fail", [("steady", "thd")]))
    t.add(_record("D", "aborted"))
    d = t.to_dict()
    # first-pass yield = units whose first run passed / units tested (common practice, no source)
    assert (d["tested"], d["passed"], d["runs"]) == (4, 2, 5)
    assert d["fpy"] == pytest.approx(1 / 4)
    assert d["top_failure"] == {"label": "steady · thd", "count": 2}


def test_the_capture_picture_keeps_every_extreme():
    rate, n = 50_000.0, 25_000
    t = np.arange(n) / rate
    x = 1.2 * np.sin(2 * np.pi * 955.0 * t) + 0.01 * np.cos(2 * np.pi * 7.0 * t)
    x[12_345] = 3.0  # a one-sample spike must survive the reduction
    capture = SimpleNamespace(samples=x, sample_rate=rate, channel="out")
    pic = wave_picture(capture, "steady")
    assert pic["n"] == n and len(pic["lo"]) == len(pic["hi"]) == WAVE_COLUMNS
    edges = np.linspace(0, n, WAVE_COLUMNS + 1).astype(int)
    for i in (0, 1, 246, 493, WAVE_COLUMNS - 1):  # direct min/max of each column's samples
        part = x[edges[i]:edges[i + 1]]
        assert pic["lo"][i] == pytest.approx(part.min(), rel=1e-4)
        assert pic["hi"][i] == pytest.approx(part.max(), rel=1e-4)
    assert pic["vmax"] == pytest.approx(3.0) and max(pic["hi"]) == pytest.approx(3.0)
    start = (n - DETAIL_SAMPLES) // 2
    assert pic["detail"] == pytest.approx(x[start:start + DETAIL_SAMPLES], rel=1e-4)
    assert pic["detail_start"] == pytest.approx(start / rate)


def test_the_capture_picture_of_a_short_or_broken_record():
    x = np.array([0.0, np.nan, 1.0])
    pic = wave_picture(SimpleNamespace(samples=x, sample_rate=10.0, channel="out"), None)
    assert pic["lo"] == [0.0, None, 1.0] and pic["detail"] == [0.0, None, 1.0]
    empty = wave_picture(SimpleNamespace(samples=np.array([]), sample_rate=10.0, channel="out"), None)
    assert empty["n"] == 0 and empty["lo"] == []


@pytest.mark.parametrize("serial, defect", [("TB3-HIGH-GAIN-1", "high_gain"), ("oh-supply noise-7", "supply_noise"),
                                            ("TB3-0001", None), ("TB3-LOW_GAIN", "low_gain")])
def test_the_understudy_bench_reads_a_defect_from_the_serial(serial, defect):
    defects = ("wrong_capacitor", "low_gain", "high_gain", "open_section", "supply_noise", "intermittent")
    assert defect_in(serial, defects) == defect


def test_the_board_wakes_its_subscribers():
    import asyncio

    board = Board()

    async def main() -> tuple[int, str]:
        loop = asyncio.get_running_loop()
        woken = asyncio.Event()
        board.subscribe(loop, woken)
        threading.Thread(target=board.update, kwargs={"serial": "<b>SN</b>"}).start()
        await asyncio.wait_for(woken.wait(), 10)
        return board.snapshot()

    out: dict = {}  # a loop of its own, in a thread (the browser tests' driver may hold this one)
    runner = threading.Thread(target=lambda: out.update(r=asyncio.run(main())))
    runner.start()
    runner.join(10)
    version, text = out["r"]
    assert version == 2 and '"serial": "<b>SN</b>"' in text  # data, escaped by the page, never HTML


def test_the_board_never_sends_what_a_browser_cannot_parse():
    import json

    board = Board()
    board.update(progress={"fraction": 0.5, "left": float("nan")}, checks=[{"number": float("inf")}])
    def refuse(token):
        raise AssertionError(f"{token} is not JSON")  # RFC 8259, 6: NaN and Infinity are not permitted

    state = json.loads(board.snapshot()[1], parse_constant=refuse)
    assert state["progress"] == {"fraction": 0.5, "left": None} and state["checks"] == [{"number": None}]


def test_an_unconfirmed_supply_raises_the_alarm(face):
    face.alarm("SWITCH THE SUPPLY OFF BY HAND: the supply did not confirm that its output is off")
    assert face.board.get("alarm").startswith("SWITCH THE SUPPLY OFF BY HAND")
    assert face.board.get("supply")["state"] == "on"


def test_a_preview_replaces_the_picture_until_the_step_ends(face):
    import json

    from benchgate.instruments.preview import PreviewBuilder

    step = SimpleNamespace(id="steady", title="Tone", kind="capture")
    face.step_started(1, 1, step)
    builder = PreviewBuilder("out", 1000.0, 2000)
    builder.add(np.sin(np.arange(500) / 10))
    face.capture_preview(builder.take())
    _, text = face.board.wave()
    wave = json.loads(text)
    assert wave["recording"] is True and wave["step"] == "steady"
    assert wave["received"] == 500 and wave["expected"] == 2000 and len(wave["lo"]) == WAVE_COLUMNS
    face.step_finished(SimpleNamespace(id="steady", status="aborted", error="stopped"))
    wave = json.loads(face.board.wave()[1])
    assert wave["recording"] is False and wave["ended"] is True  # cut short: no longer "recording"
    face.capture_preview(builder.take())
    asker = Asker(face, lambda f: f.ask_retry("The capture failed. Re-seat the board."))
    assert json.loads(face.board.wave()[1])["recording"] is False  # asked after it failed
    face.answer(face.board.get("ask")["id"], "n")
    asker.done()
    face.board.set_wave({"step": "steady", "n": 3})  # a capture that landed is left as it is
    version = face.board.wave()[0]
    face.board.end_recording()
    assert face.board.wave()[0] == version
