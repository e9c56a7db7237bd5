"""The tone, sweep and level_sweep steps run on the understudy bench: a good LP-2 passes, a
defect fails the check it should, the generator is left off, both channels are kept."""

from __future__ import annotations

from pathlib import Path

import pytest

from benchgate.judge.rules import Verdict
from benchgate.runner.attendant import Silent
from benchgate.runner.options import RunOptions
from benchgate.runner.session import Runner

ROOT = Path(__file__).resolve().parents[2]


class PreviewWatch(Silent):
    """Keeps the step and channel of every preview of a capture being taken."""

    def __init__(self) -> None:
        self.step = ""
        self.previews: list[tuple[str, str]] = []

    def step_started(self, index, total, step):
        self.step = step.id

    def capture_preview(self, preview):
        self.previews.append((self.step, preview.channel))


@pytest.fixture(scope="module")
def lp2_runs(tmp_path_factory):
    from benchgate.instruments.station import load_station
    from benchgate.plan import load_plan
    from benchgate.sim.bench import UnderstudyBench

    plan = load_plan(str(ROOT / "testplans" / "lp2.yaml"))
    tmp = tmp_path_factory.mktemp("lp2")
    out = {"face": PreviewWatch()}
    with UnderstudyBench("lp2", speed=20, workdir=tmp / "bench") as ub:
        options = RunOptions(reports_dir=tmp / "reports", unattended=True, clock=ub.clock)
        with Runner(plan, load_station(ub.station_path), options, attendant=out["face"]) as runner:
            for serial, defect in (("LP2-0001", None), ("LP2-0002", "wrong_capacitor")):
                ub.load_unit(serial, defect)
                out[defect] = runner.run(serial)
                out[(defect, "generator_on")] = ub.server.instruments["generator"].output
    return out


def _checks(outcome, step_id):
    (step,) = [s for s in outcome.record.steps if s.id == step_id]
    return step


def test_good_lp2_passes_every_check(lp2_runs):
    rec = lp2_runs[None].record
    assert rec.verdict == Verdict.PASS, rec.reason
    sweep = _checks(lp2_runs[None], "response")
    mask = [c for c in sweep.checks if c.measurement.startswith("gain_db at ")]
    assert len(mask) == 17  # every one of the 17 points lies inside the mask's span
    assert mask[0].measurement == "gain_db at 100.0 Hz" and mask[0].result.name == "gain_db"
    assert all("frequency_hz" in c.result.details and "phase_deg" in c.result.details for c in mask)
    f3 = [c for c in sweep.checks if c.measurement == "f_3db_high"][0]
    assert f3.verdict == Verdict.PASS and f3.result.uncertainty > 0


def test_wrong_capacitor_fails_the_corner_and_the_mask(lp2_runs):
    outcome = lp2_runs["wrong_capacitor"]
    assert outcome.record.verdict == Verdict.FAIL
    sweep = _checks(outcome, "response")
    f3 = [c for c in sweep.checks if c.measurement == "f_3db_high"][0]
    assert f3.verdict == Verdict.FAIL and "below" in f3.reason
    assert any(c.verdict == Verdict.FAIL for c in sweep.checks if c.measurement.startswith("gain_db at "))


def test_generator_left_off_and_both_channels_kept(lp2_runs):
    assert lp2_runs[(None, "generator_on")] is False
    folder = Path(lp2_runs[None].paths["json"]).parent
    assert list(folder.glob("*pass-band-in.npz")) and list(folder.glob("*pass-band-out.npz"))
    assert len(list(folder.glob("*response-p*-out.npz"))) == 17
    html = Path(lp2_runs[None].paths["html"]).read_text(encoding="utf-8")
    assert 'aria-label="gain, response"' in html and 'aria-label="phase, response"' in html


def test_generator_switched_off_when_the_recorder_fails():
    from types import SimpleNamespace

    from benchgate.errors import InstrumentError
    from benchgate.plan import loads_plan
    from benchgate.runner.stimulus import run_tone

    class Gen:
        name, address, identity = "generator", "sim", "gen"
        on = False

        def close(self): ...
        def set_waveform(self, w): ...
        def set_frequency(self, f): ...
        def set_amplitude(self, v, unit="Vpp"): ...
        def set_offset(self, v): ...
        def set_load(self, r): ...
        def output_state(self): return self.on

        def output(self, on):
            self.on = bool(on)

    class BrokenRecorder:
        name, address, identity = "digitizer", "sim", "dig"

        def close(self): ...
        def capture(self, channel, *, duration, rate=None, progress=None): ...

        def capture_channels(self, channels, *, duration, rate=None, progress=None):
            assert gen.on  # the stimulus is on while recording
            raise InstrumentError("digitizer", "link lost")

    gen = Gen()
    plan = loads_plan('plan: t\nversion: "1"\nproduct: p\nrequires: [generator, digitizer]\nsteps:\n'
                      '  - {id: s, title: t, kind: tone, frequency: 1 kHz, level: 1 Vpp, settle: 0 s}\n', "t.yaml")
    bench = {"generator": gen, "digitizer": BrokenRecorder()}
    ex = SimpleNamespace(bench=bench, require_bench=lambda: bench, sleep=lambda s, t: None,
                         hooks=SimpleNamespace(progress=lambda *a: None))
    with pytest.raises(InstrumentError, match="link lost"):
        run_tone(ex, plan.steps[0], SimpleNamespace(capture=None), 1)
    assert gen.on is False


def test_the_face_sees_each_stimulus_record_while_it_is_taken(lp2_runs):
    # the two-channel records of tone and sweep steps send previews of their first channel
    # (the stimulus) like any capture; a preview is sent as soon as a record starts
    seen = lp2_runs["face"].previews
    steps = {s for s, _ in seen}
    assert {"pass-band", "response"} <= steps, steps
    assert {c for s, c in seen if s == "pass-band"} == {"in"}
