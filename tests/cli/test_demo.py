"""``benchgate demo``: a simulated lot on the understudy bench, reports, summary, table or JSON."""

from __future__ import annotations

import json
from pathlib import Path

import pytest

from benchgate.cli import main
from benchgate.runner.demo import KNOWN_DEFECTS, DemoResult, DemoUnit, defects, find_plan, make_lot

REPO = Path(__file__).resolve().parents[2]


def test_shipped_plan_copy_matches_testplans():
    shipped = REPO / "src" / "benchgate" / "demo" / "tb3.yaml"
    assert shipped.read_bytes() == (REPO / "testplans" / "tb3.yaml").read_bytes()
    assert find_plan() == REPO / "testplans" / "tb3.yaml"  # a checkout uses the original


def test_lot_has_every_defect_once_and_starts_good():
    lot = make_lot(12, "L", KNOWN_DEFECTS)
    assert len(lot) == 12 and lot[0].defect is None
    assert sorted(u.defect for u in lot if u.defect) == sorted(KNOWN_DEFECTS)
    assert len({u.serial for u in lot}) == 12
    assert [u.defect for u in make_lot(12, "L", KNOWN_DEFECTS)] == [u.defect for u in lot]  # fixed order


@pytest.mark.parametrize("units", [1, 2, 3, 6])
def test_small_lot_has_the_units_asked_for_and_says_what_it_leaves_out(units):
    from benchgate.runner.demo import lot_note

    lot = make_lot(units, "L", KNOWN_DEFECTS)
    assert len(lot) == units and lot[0].defect is None
    found = [u.defect for u in lot if u.defect]
    assert len(found) == units - 1 and len(set(found)) == len(found) and set(found) <= set(KNOWN_DEFECTS)
    assert [u.defect for u in make_lot(units, "L", KNOWN_DEFECTS)] == [u.defect for u in lot]
    note = lot_note(units, KNOWN_DEFECTS)
    assert note is not None and f"shows {units - 1} of the {len(KNOWN_DEFECTS)}" in note
    assert lot_note(len(KNOWN_DEFECTS) + 1, KNOWN_DEFECTS) is None


@pytest.fixture(scope="module")
def demo_json(tmp_path_factory):
    import contextlib
    import io

    reports = tmp_path_factory.mktemp("demo")
    out = io.StringIO()
    with contextlib.redirect_stdout(out):
        # ×2, not the default ×4: the simulated ADC must keep up on a busy 2-core CI machine,
        # or the host's rate cross-check rightly refuses a capture that arrived too slowly
        code = main(["demo", "--units", "12", "--json", "--reports", str(reports), "--speed", "2"])
    return code, json.loads(out.getvalue()), reports


def test_demo_json_lot(demo_json):
    code, data, reports = demo_json
    assert code == 0
    assert set(data) >= {"lot", "units", "summary"}
    units = data["units"]
    assert len(units) == 12
    assert sorted(u["defect"] for u in units if u["defect"]) == sorted(KNOWN_DEFECTS)
    for u in units:
        assert set(u) >= {"serial", "verdict", "report"}
        assert Path(u["report"]).exists() and Path(u["report"]).with_suffix(".html").exists()
        assert json.loads(Path(u["report"]).read_text())["serial"] == u["serial"]
    good = [u for u in units if u["defect"] is None]
    assert all(u["verdict"] == "pass" for u in good), [(u["serial"], u["reason"]) for u in good]
    for defect in KNOWN_DEFECTS:  # every injected defect is caught by a check that fails
        (unit,) = [u for u in units if u["defect"] == defect]
        assert unit["verdict"] == "fail", unit
    assert Path(data["summary"]["html"]).exists()
    assert (reports / "results.sqlite").exists()


def test_demo_table_lists_every_unit(capsys):
    result = DemoResult(lot="L1", units=[DemoUnit("L1-001", None, "pass", "all 7 checks passed"),
                                         DemoUnit("L1-002", "high_gain", "fail", "steady: thd 8 % above 5 %")],
                        summary={}, summary_html=Path("s.html"), reports_dir=Path("r"), seconds=1.0)
    from benchgate.cli.demo import _table

    _table(result)
    out = capsys.readouterr().out.splitlines()
    assert out[1].split() == ["serial", "defect", "injected", "verdict", "reason"]
    assert out[2].split()[:3] == ["L1-001", "—", "pass"]
    assert out[3].split()[:3] == ["L1-002", "high_gain", "fail"]


def test_demo_uses_the_simulators_own_defect_list():
    from benchgate.sim.boards import get_board

    assert defects("tb3") == tuple(get_board("tb3").defects)
    assert set(KNOWN_DEFECTS) == set(defects("tb3"))  # interfaces.md lists the same six


@pytest.mark.browser
def test_demo_reports_in_a_real_browser(demo_json, tmp_path):
    from benchgate.report.browser import check_page, find_chromium, screenshot

    if find_chromium() is None:
        pytest.skip("no Chromium on this machine (Debian package 'chromium'; .ci/run installs it)")
    _, data, _ = demo_json
    failed = next(u for u in data["units"] if u["verdict"] == "fail")
    pages = {
        "unit": (Path(failed["report"]).with_suffix(".html"), "FAIL"),
        "summary": (Path(data["summary"]["html"]), data["lot"]),
    }
    for name, (html, banner) in pages.items():
        page = check_page(html)
        assert banner in page.text, name
        assert page.console_errors == [], (name, page.console_errors)
        assert page.requests == [], (name, page.requests)  # self-contained: no request of any kind
        assert page.svg_sizes and all(w > 0 and h > 0 for _, w, h in page.svg_sizes), name
        png = tmp_path / f"{name}.png"
        screenshot(html, png)
        assert png.stat().st_size > 10_000


def test_demo_runs_the_number_of_units_asked_for(tmp_path, capsys):
    code = main(["demo", "--units", "2", "--json", "--reports", str(tmp_path), "--speed", "8"])
    captured = capsys.readouterr()
    data = json.loads(captured.out)
    assert code == 0 and len(data["units"]) == 2
    assert data["units"][0]["defect"] is None and data["units"][1]["defect"] in KNOWN_DEFECTS


def test_a_stop_signal_ends_the_lot_after_the_unit_it_aborts(tmp_path):
    import os
    import signal
    import sqlite3
    import subprocess
    import sys

    env = {k: v for k, v in os.environ.items() if k != "CI"}
    proc = subprocess.Popen([sys.executable, "-m", "benchgate", "demo", "--units", "4", "--speed", "4",
                             "--reports", str(tmp_path)], env=env, stdin=subprocess.DEVNULL,
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
    try:
        for line in proc.stderr:  # progress lines, one per finished unit: wait for the first
            if line.startswith("[ 1/4]"):
                break
        proc.send_signal(signal.SIGTERM)
        out, err = proc.communicate(timeout=60)
    finally:
        if proc.poll() is None:
            proc.kill()
    assert proc.returncode == 143, (out, err)
    assert "stopped early" in out and "Traceback" not in err
    conn = sqlite3.connect(tmp_path / "results.sqlite")
    rows = conn.execute("SELECT serial, complete, verdict FROM runs ORDER BY started").fetchall()
    conn.close()
    # the signal lands in the next unit (aborted) or between two units: either way the lot ends
    # there and every row is complete
    assert 1 <= len(rows) < 4 and all(r[1] == 1 for r in rows)
    assert all(r[2] != "aborted" for r in rows[:-1])
