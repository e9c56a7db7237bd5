"""--batch: serial after serial until an empty line, with a running tally."""

from __future__ import annotations

from runner_fakes import Recording, Station, make_bench, services, standard_plan, terminal

from benchgate.clock import ManualClock
from benchgate.runner.batch import run_batch, tally_line
from benchgate.runner.options import RunOptions
from benchgate.runner.session import Runner


def test_read_serial_strips_scanner_line_ends():
    assert terminal(lambda p: "  TB3-0042\r").ask_serial("sn: ") == "TB3-0042"
    assert terminal(lambda p: "").ask_serial("sn: ") is None
    assert terminal().ask_serial("sn: ") is None  # end of input


def test_batch_runs_until_empty_line_with_tally(tmp_path):
    bench = make_bench()
    lines = iter(["A1", "A2\r", "A3", "", "never"])
    svc, db = services(bench)
    options = RunOptions(reports_dir=tmp_path, clock=ManualClock())

    def ask(prompt):
        line = next(lines)
        bench["adc"].frequency = 1100.0 if line == "A2\r" else 1000.0
        return line

    face = Recording(ask)
    with Runner(standard_plan(), Station(), options, services=svc, attendant=face) as runner:
        outcomes = run_batch(runner)
    shown = face.lines
    assert [o.record.serial for o in outcomes] == ["A1", "A2", "A3"]
    assert [o.exit_code for o in outcomes] == [0, 1, 0]
    assert shown == ["tally: 1 unit — 1 pass", "tally: 2 units — 1 pass, 1 fail",
                     "tally: 3 units — 2 pass, 1 fail"]
    assert len(db.rows) == 3


def test_tally_line_none():
    from collections import Counter

    assert tally_line(Counter(), 0) == "tally: 0 units — none"
