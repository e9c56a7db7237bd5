"""The waveform of the capture being taken, drawn on the page while it records (headless Chromium,
the real server, runner and understudy bench)."""

from __future__ import annotations

import pytest
from web_support import plan_text, wait

pytestmark = pytest.mark.browser

LIVE = """(before) => {
    const c = document.getElementById('wave');
    return c.dataset.recording === 'yes' && c.dataset.step === 'steady' && +c.dataset.received > before;
}"""


def test_the_capture_is_drawn_while_it_records(serve_page, context, shot, ubench):
    served = serve_page(plan_text(hazard=False, steady="4 s"))  # 200 000 samples at 50 kS/s
    page = context.new_page()
    errors: list[str] = []
    page.on("console", lambda m: errors.append(m.text) if m.type == "error" else None)
    page.on("pageerror", lambda e: errors.append(str(e)))
    page.goto(served.url)
    page.wait_for_selector('body[data-phase="idle"]')
    page.fill("#serial", "OH-LIVE-0001")
    page.press("#serial", "Enter")
    wait(page, '#ask[data-kind="yesno"]:not([hidden])', retry=False)
    page.keyboard.press("y")

    seen = []  # samples so far, at three moments of the one capture
    wait(page, '#wave[data-recording="yes"][data-step="steady"]')
    seen.append(int(page.get_attribute("#wave", "data-received")))
    for _ in range(2):
        page.wait_for_function(LIVE, arg=seen[-1])
        seen.append(int(page.get_attribute("#wave", "data-received")))
    caption = page.text_content("#wave-caption")
    assert page.get_attribute("#wave", "data-recording") == "yes"  # still recording after two updates
    assert caption.startswith("Recording… step steady, channel out: ") and "of 200 000 samples" in caption
    assert int(page.get_attribute("#wave", "data-points")) == 800
    assert seen == sorted(seen) and len(set(seen)) == 3 and seen[-1] < 200_000, seen
    shot(page, "recording")

    # the capture lands: its own plot replaces the preview
    page.wait_for_selector('#wave[data-recording="no"][data-step="steady"]')
    assert page.get_attribute("#wave", "data-received") == "200000"
    assert page.text_content("#wave-caption").startswith("Capture of step steady, channel out: 200 000 samples")
    wait(page, 'body[data-phase="finished"][data-units="1"]')
    assert page.get_attribute("#verdict", "data-verdict") == "pass", page.text_content("#verdict-reason")
    shot(page, "landed")
    assert errors == []
    assert ubench.supply_output is False
