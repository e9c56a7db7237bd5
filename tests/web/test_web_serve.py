"""``benchgate serve`` as a process: stopping the server mid-run leaves the supply off."""

from __future__ import annotations

import json
import queue
import signal
import sqlite3
import subprocess
import sys
import threading

import pytest
from web_support import SPEED, http, origin, page_keys, plan_text, wait

from benchgate.web.guard import CSRF_HEADER

pytestmark = pytest.mark.browser


def first_line(stream, timeout: float) -> str:
    lines: queue.Queue = queue.Queue()
    threading.Thread(target=lambda: lines.put(stream.readline()), daemon=True).start()
    try:
        return lines.get(timeout=timeout)
    except queue.Empty:
        raise AssertionError("benchgate serve printed no address") from None


@pytest.mark.parametrize("sig", [signal.SIGINT, signal.SIGTERM], ids=["ctrl-c", "sigterm"])
def test_stopping_the_server_mid_capture_switches_the_supply_off(ubench, browser, tmp_path, sig):
    plan = tmp_path / "plan.yaml"
    plan.write_text(plan_text(steady="30 s"), encoding="utf-8")
    reports = tmp_path / "reports"
    ubench.load_unit("OH-SIG-0001")
    proc = subprocess.Popen(
        [sys.executable, "-m", "benchgate", "serve", str(plan), "--station", str(ubench.station_path),
         "--clock-speed", str(SPEED), "--port", "0", "--reports", str(reports)],
        stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
    ctx = browser.new_context()
    try:
        line = first_line(proc.stdout, 60)
        assert line.startswith("operator page for station understudy-bench: http://127.0.0.1:"), line
        url = line.rsplit(" ", 1)[1].strip()
        page = ctx.new_page()
        page.set_default_timeout(30_000)
        page.goto(url)
        page.wait_for_selector('body[data-phase="idle"]')
        page.keyboard.type("OH-SIG-0001")
        page.keyboard.press("Enter")
        page.wait_for_selector('#ask[data-kind="hazard"]:not([hidden])')
        page.keyboard.press("a")
        page.wait_for_selector('#ask[data-kind="yesno"]:not([hidden])')
        page.keyboard.press("y")
        wait(page, 'body[data-step="steady"][data-moving="yes"]')  # mid-capture, supply on
        assert ubench.supply_output is True
        proc.send_signal(sig)
        page.wait_for_selector("#closing:not([hidden])")  # every open page is told
        code = proc.wait(timeout=60)
    finally:
        ctx.close()
        if proc.poll() is None:
            proc.kill()
            proc.wait()
    err = proc.stderr.read()
    assert code == 0, err
    assert ubench.supply_output is False  # asked from the emulated supply's SCPI server
    conn = sqlite3.connect(reports / "results.sqlite")
    try:
        rows = conn.execute("SELECT complete, verdict, run_id FROM runs WHERE serial = 'OH-SIG-0001'").fetchall()
    finally:
        conn.close()
    assert [r[:2] for r in rows] == [(1, "aborted")]
    (report,) = [json.loads(p.read_text(encoding="utf-8")) for p in reports.rglob("*.json")]
    assert report["run_id"] == rows[0][2] and report["verdict"] == "aborted"
    assert report["flags"]["stopped"] == "the operator page's server is stopping"
    assert report["reason"].startswith("aborted: the operator page's server is stopping during step steady")


def test_one_desk_per_station_and_no_run_beside_it(serve_page, ubench, tmp_path):
    from benchgate.errors import StationBusy
    from benchgate.instruments.station import load_station
    from benchgate.plan import load_plan
    from benchgate.runner.options import RunOptions
    from benchgate.runner.session import Runner
    from benchgate.web.desk import Desk, DeskConfig

    served = serve_page()
    plan = next(tmp_path.glob("plan-*.yaml"))
    with pytest.raises(StationBusy, match="station busy"):
        Desk(DeskConfig(station=ubench.station_path, plans=[plan], reports_dir=tmp_path / "other"))
    with pytest.raises(StationBusy):  # benchgate run on the same bench is refused too
        Runner(load_plan(str(plan)), load_station(ubench.station_path),
               RunOptions(reports_dir=tmp_path / "other", accept_hazards=True, unattended=True))
    assert served.desk.board.get("supply")["state"] in ("off", "unknown")


def test_an_expired_calibration_blocks_the_page_until_allowed(ubench, tmp_path):
    import datetime as dt
    import re

    from benchgate.web.desk import Desk, DeskConfig

    past = (dt.date.today() - dt.timedelta(days=3)).isoformat()
    text = ubench.station_text()
    # the supply's calibration ran out three days ago (the ADC channels stay valid)
    text = re.sub(r"(  supply:\n(?:    .*\n)*?    calibration: \{date: )[0-9-]+, due: [0-9-]+",
                  lambda m: f"{m.group(1)}2025-01-01, due: {past}", text)
    assert f"due: {past}" in text
    station = tmp_path / "expired.yaml"
    station.write_text(text, encoding="utf-8")
    plan = tmp_path / "plan.yaml"
    plan.write_text(plan_text(), encoding="utf-8")

    def desk(**kw) -> Desk:
        return Desk(DeskConfig(station=station, plans=[plan], reports_dir=tmp_path / "r", probe=False, **kw))

    blocked = desk()
    try:
        assert f"supply calibration was due {past}" in blocked.board.get("blocked")
        listed = {i["role"]: i for i in blocked.board.get("station")["instruments"]}
        assert listed["supply"]["cal_status"] == "expired" and listed["adc"]["cal_status"] == "valid"
        assert blocked.scan("OH-CAL-0001", "page")[0] == 409  # nothing is started
    finally:
        blocked.shutdown()
    allowed = desk(allow_expired_calibration=True)
    try:
        assert allowed.board.get("blocked") is None
    finally:
        allowed.shutdown()


def test_a_question_nobody_can_see_stops_the_run(serve_page, ubench):
    # the page was closed while the run waited for an answer: after abandon_after s it is stopped
    served = serve_page(plan_text(hazard=False), abandon_after=0.5)
    ubench.load_unit("OH-GONE-0001")
    csrf, cookie = page_keys(served.url)  # the page was loaded once, then closed (no live stream)
    headers = {"Origin": origin(served.url), CSRF_HEADER: csrf, "Cookie": cookie,
               "Content-Type": "application/json"}
    assert http(served.url + "api/scan", "POST", headers, b'{"serial": "OH-GONE-0001"}')[0] == 202
    assert served.desk.wait_idle(30)
    result = served.desk.board.get("result")
    assert result["verdict"] == "aborted"
    assert result["stopped"] == "no operator page was open for 0.5 s while the run waited for an answer"
    assert [r[1:] for r in served.rows("OH-GONE-0001")] == [(1, "aborted")]
    assert ubench.supply_output is False


def test_bad_input_is_one_line_and_nothing_is_served(tmp_path, capsys):
    from benchgate.cli import main

    broken = tmp_path / "broken.yaml"
    broken.write_text(plan_text().replace("decision: simple", "decision: lenient"), encoding="utf-8")
    assert main(["serve", str(broken), "--understudy", "tb3", "--port", "0"]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and err[0].startswith(f"benchgate: {broken}:") and "decision" in err[0], err
    assert main(["serve", str(tmp_path / "missing.yaml"), "--understudy", "tb3", "--port", "0"]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert err == [f"benchgate: {tmp_path / 'missing.yaml'}: no such plan file"]
    assert main(["serve", str(broken), "--understudy", "tb3", "--speed", "0"]) == 2
    assert "--speed must be > 0" in capsys.readouterr().err
