"""The operator page end to end: headless Chromium, the real server, runner and understudy bench."""

from __future__ import annotations

import json

import pytest
from web_support import HAZARD, plan_text, wait

pytestmark = pytest.mark.browser

GOOD_CHECKS = 10  # tb3.yaml: power-on 4, supply-current 1, steady 5


class Shown(str):
    """A verdict as the page shows it; its repr carries the page's reason (for failure messages)."""

    reason = ""

    def __repr__(self) -> str:
        return f"{str.__repr__(self)} ({self.reason})"


def finished(page, units: int, retry: bool = True) -> Shown:
    """Wait for the verdict of the ``units``-th unit of the session; return it."""
    wait(page, f'body[data-phase="finished"][data-units="{units}"]', retry)
    page.wait_for_selector("#verdict:not([hidden])")
    shown = Shown(page.get_attribute("#verdict", "data-verdict"))
    shown.reason = f"{page.text_content('#verdict-reason')} | {page.text_content('#failed')}"
    return shown


def asked(page, kind: str):
    return wait(page, f'#ask[data-kind="{kind}"]:not([hidden])', retry=kind != "retry")


def watch_console(page) -> tuple[list, list]:
    errors: list[str] = []
    requests: list[str] = []
    page.on("console", lambda m: errors.append(m.text) if m.type == "error" else None)
    page.on("pageerror", lambda e: errors.append(str(e)))
    page.on("request", lambda r: requests.append(r.url))
    return errors, requests


def test_units_from_scan_to_verdict(serve_page, context, shot, ubench):
    served = serve_page()
    page = context.new_page()
    errors, requests = watch_console(page)
    page.goto(served.url)
    page.wait_for_selector('body[data-phase="idle"]')
    page.wait_for_selector('#supply[data-state="off"]')  # asked from the supply at start
    assert page.evaluate("document.activeElement.id") == "serial"
    assert "OH-ADC2" in page.text_content("#instruments")  # identities read from the instruments
    shot(page, "1-waiting-for-a-unit")

    page.fill("#serial", "OH-WEB-0001")
    page.press("#serial", "Enter")  # a barcode scanner types and presses Enter
    asked(page, "hazard")
    assert page.text_content("#ask-title") == HAZARD[0].replace("_", " ")
    assert page.text_content("#ask-text") == HAZARD[1]
    assert page.text_content("#ask-kind") == "Hazard 1 of 1"
    shot(page, "2-hazard")
    page.click("#ask-ack")
    asked(page, "yesno")
    assert "Place the TB-3 in the fixture" in page.text_content("#ask-text")
    shot(page, "3-prompt")
    page.click("#ask-yes")

    assert finished(page, 1) == "pass"
    assert page.text_content("#verdict-word") == "PASS"
    assert page.is_visible(".shape-pass") and not page.is_visible(".shape-fail")
    rows = page.query_selector_all("#checks tbody tr")
    assert len(rows) == GOOD_CHECKS
    assert {r.get_attribute("data-verdict") for r in rows} == {"pass"}
    assert "±" in page.text_content("#checks tbody")
    page.wait_for_selector('#supply[data-state="off"]')
    assert "asked from the supply" in page.text_content("#supply-text")
    assert int(page.get_attribute("#wave", "data-points")) > 100
    shot(page, "4-pass")

    report_errors: list[str] = []
    context.on("console", lambda m: report_errors.append(m.text)
               if m.type == "error" and "/reports/" in m.page.url else None)
    with context.expect_page() as opened:
        page.click("#report-link")
    report = opened.value
    report.wait_for_load_state()
    assert report.url.startswith(served.url + "reports/") and report.url.endswith(".html")
    assert "OH-WEB-0001" in report.content()
    shot(report, "5-report")
    report.close()
    assert report_errors == []  # served read-only from the report folder, nothing blocked

    page.keyboard.press("F2")  # retest the same unit with one key; hazards were acknowledged
    asked(page, "yesno")
    page.keyboard.press("y")
    assert finished(page, 2) == "pass"
    assert page.text_content("#verdict-serial") == "Unit OH-WEB-0001"
    history = page.query_selector_all("#history li")
    assert len(history) == 1 and "PASS" in history[0].text_content()

    served.defects["OH-WEB-0002"] = "high_gain"
    page.fill("#serial", "OH-WEB-0002")  # the next unit: one scan
    page.press("#serial", "Enter")
    asked(page, "yesno")
    page.keyboard.press("y")
    asked(page, "retry")  # the start-up capture failed; the plan allows one retry, asked for
    assert "Re-seat the board" in page.text_content("#ask-text")
    shot(page, "6-retry")
    page.keyboard.press("n")  # leave it failed
    assert finished(page, 3, retry=False) == "fail"
    assert page.text_content("#verdict-word") == "FAIL"
    assert page.is_visible(".shape-fail") and not page.is_visible(".shape-pass")
    failed = page.text_content("#failed")
    # interfaces.md: high_gain clips -> high THD; the plan allows at most 5 %
    assert "steady · thd" in failed and "above 5.000 %" in failed
    assert page.text_content("#tally-tested") == "2"
    assert page.text_content("#tally-passed") == "1"
    assert page.text_content("#tally-fpy") == "50 %"
    top = page.text_content("#tally-top")  # one unit failed, so each of its failed checks counts once
    assert top.endswith("(1×)") and top.removesuffix(" (1×)") in failed
    shot(page, "7-fail")

    assert [r[1:] for r in served.rows("OH-WEB-0001")] == [(1, "pass"), (1, "pass")]
    assert [r[1:] for r in served.rows("OH-WEB-0002")] == [(1, "fail")]
    assert errors == []
    assert all(url.startswith(served.url) for url in requests), requests  # nothing from outside
    assert ubench.supply_output is False


def test_keyboard_only(serve_page, context, shot):
    served = serve_page()
    page = context.new_page()
    page.goto(served.url)
    page.wait_for_selector('body[data-phase="idle"]')
    page.keyboard.type("OH-KEY-0001")
    page.keyboard.press("Enter")
    asked(page, "hazard")
    page.keyboard.type("A1DA", delay=5)  # a scan arriving while the hazard is shown answers nothing
    page.keyboard.press("Enter")
    assert page.evaluate("fetch('/api/state').then(r => r.json()).then(s => s.ask && s.ask.kind)") == "hazard"
    page.keyboard.press("a")
    asked(page, "yesno")
    page.keyboard.press("y")
    assert finished(page, 1) == "pass"
    page.keyboard.press("F2")
    asked(page, "yesno")
    page.keyboard.press("y")
    assert finished(page, 2) == "pass"
    page.keyboard.type("OH-KEY-0002")  # the serial field has focus again: scan the next unit
    page.keyboard.press("Enter")
    asked(page, "yesno")
    page.keyboard.press("n")  # the board is not in the fixture: a declined prompt stops the unit
    assert finished(page, 3, retry=False) == "aborted"
    assert "connect" in page.text_content("#failed") and "only with 'yes'" in page.text_content("#verdict")
    page.keyboard.press("Escape")  # STOP with nothing running: the supply is switched off and asked
    page.wait_for_selector("#supply-text >> text=STOP: supply output off (asked from the supply)")
    assert page.get_attribute("#supply", "data-state") == "off"
    shot(page, "keyboard-only")
    assert [r[2] for r in served.rows("OH-KEY-0001")] == ["pass", "pass"]


def test_stop_mid_capture(serve_page, context, shot, ubench):
    served = serve_page(plan_text(steady="30 s"))
    page = context.new_page()
    page.goto(served.url)
    page.fill("#serial", "OH-STOP-0001")
    page.press("#serial", "Enter")
    asked(page, "hazard")
    page.keyboard.press("a")
    asked(page, "yesno")
    page.keyboard.press("y")
    wait(page, 'body[data-step="steady"][data-moving="yes"]')  # the capture is recording
    assert "s left" in page.text_content("#time-left")
    assert page.is_visible("#stop")
    shot(page, "1-capturing")
    page.click("#stop")
    assert finished(page, 1) == "aborted"
    assert page.text_content("#verdict-word") == "ABORTED"
    assert page.is_visible(".shape-aborted")
    page.wait_for_selector('#supply[data-state="off"]')
    assert page.text_content("#supply-word") == "OFF"
    assert ubench.supply_output is False  # asked from the emulated supply's SCPI server
    shot(page, "2-stopped")

    ((run_id, complete, verdict),) = served.rows("OH-STOP-0001")
    assert (complete, verdict) == (1, "aborted")
    report = json.loads(next((served.reports).rglob("*.json")).read_text(encoding="utf-8"))
    assert report["run_id"] == run_id and report["verdict"] == "aborted"
    assert report["flags"]["stopped"] == "Stop pressed on the operator page"
    assert report["reason"] == "aborted: Stop pressed on the operator page during step steady"
    steady = next(s for s in report["steps"] if s["id"] == "steady")
    assert steady["status"] == "aborted"  # stopped during the capture, not after it

    # the next unit right away: the ADC was told to stop streaming, so it opens and identifies
    page.fill("#serial", "OH-STOP-0002")
    page.press("#serial", "Enter")
    asked(page, "yesno")
    page.keyboard.press("y")
    wait(page, 'body[data-step="steady"][data-moving="yes"]')
    assert {r.get_attribute("data-verdict") for r in page.query_selector_all("#checks tbody tr")} == {"pass"}
    page.keyboard.press("Escape")
    assert finished(page, 2) == "aborted"
    assert ubench.supply_output is False


def test_reload_resumes_and_a_second_page_only_watches(serve_page, browser, context, shot, ubench):
    served = serve_page(plan_text(steady="30 s"))
    page = context.new_page()
    page.goto(served.url)
    page.fill("#serial", "OH-TWO-0001")
    page.press("#serial", "Enter")
    asked(page, "hazard")

    other_ctx = browser.new_context(viewport={"width": 1400, "height": 1000})
    try:
        other = other_ctx.new_page()
        other.goto(served.url)
        asked(other, "hazard")
        other.wait_for_selector("#watching:not([hidden])")
        assert other.is_disabled("#ask-ack")
        other.keyboard.press("a")  # ignored: this screen only watches
        refused = other.evaluate("""async () => {
            const csrf = document.querySelector('meta[name="benchgate-csrf"]').content;
            const r = await fetch('/api/answer', {method: 'POST', headers: {'Content-Type': 'application/json',
                'X-Benchgate-Csrf': csrf}, body: JSON.stringify({ask: 1, answer: 'acknowledge'})});
            return r.status; }""")
        assert refused == 403
        assert page.is_visible('#ask[data-kind="hazard"]')  # still waiting for its own screen
        shot(other, "1-watching")

        page.keyboard.press("a")
        asked(page, "yesno")
        page.keyboard.press("y")
        wait(page, 'body[data-step="steady"]')
        page.reload()
        page.wait_for_selector('body[data-phase="running"][data-control="yes"][data-step="steady"][data-moving="yes"]')
        assert page.text_content("#step-title") == "Tone after warm-up"
        assert page.is_hidden("#watching")
        assert page.query_selector_all("#checks tbody tr")  # the checks so far came back too
        shot(page, "2-reloaded")

        other.wait_for_selector("#live:not([hidden])")
        other.keyboard.press("Escape")  # STOP works from any screen
        assert finished(page, 1) == "aborted"
        assert finished(other, 1) == "aborted"
    finally:
        other_ctx.close()
    assert ubench.supply_output is False
    assert served.rows("OH-TWO-0001")[0][1:] == (1, "aborted")


def test_script_in_a_serial_is_shown_as_text(serve_page, context):
    served = serve_page()
    page = context.new_page()
    errors, requests = watch_console(page)
    page.goto(served.url)
    serial = '<script>window.__owned=1</script><img src="x" onerror="window.__owned=2">'
    page.fill("#serial", serial)
    page.press("#serial", "Enter")
    asked(page, "hazard")
    assert page.text_content("#unit-serial") == serial
    assert page.query_selector("#current img") is None and page.query_selector("#current script") is None
    page.keyboard.press("d")  # do not start: the hazard is not acknowledged
    page.wait_for_selector('body[data-phase="idle"]')
    assert "was not acknowledged" in page.text_content("#notice")
    assert served.rows(serial) == []  # nothing was started, nothing recorded

    page.fill("#serial", serial)
    page.press("#serial", "Enter")
    asked(page, "hazard")
    page.keyboard.press("a")
    asked(page, "yesno")
    page.keyboard.press("y")
    finished(page, 1)
    assert page.text_content("#verdict-serial") == "Unit " + serial
    assert page.evaluate("window.__owned") is None
    assert not any(url.endswith("/x") for url in requests)
    assert errors == []


def test_a_plan_picked_from_the_station_folder(serve_page, context):
    quick = plan_text(hazard=False).replace("plan: tb3-final", "plan: tb3-quick").replace('version: "1.0"',
                                                                                          'version: "2.0"')
    served = serve_page(more=(quick,))
    page = context.new_page()
    page.goto(served.url)
    page.wait_for_selector('body[data-phase="idle"]')
    assert page.text_content("#plan-name").startswith("tb3-final v1.0")
    assert [o.text_content() for o in page.query_selector_all("#plan-select option")] == [
        "tb3-final v1.0", "tb3-quick v2.0"]
    page.click(".station summary")
    page.select_option("#plan-select", label="tb3-quick v2.0")
    page.wait_for_selector("#plan-name >> text=tb3-quick v2.0")
    page.fill("#serial", "OH-PICK-0001")
    page.press("#serial", "Enter")
    asked(page, "yesno")  # this plan declares no hazard
    page.keyboard.press("y")
    assert finished(page, 1) == "pass"
    assert "/reports/tb3-quick/OH-PICK-0001/" in page.get_attribute("#report-link", "href")
    assert [r[1:] for r in served.rows("OH-PICK-0001")] == [(1, "pass")]
