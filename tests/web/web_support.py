"""Shared by the operator-page tests: the plan variants, the browser's flags, where screenshots go."""

from __future__ import annotations

import os
import re
import shutil
import urllib.error
import urllib.request
from pathlib import Path

REPO = Path(__file__).resolve().parents[2]
TB3 = REPO / "testplans" / "tb3.yaml"
SPEED = 1.0  # real time: the sim's pacing and the start-up window are least sensitive to a loaded machine
CHROMIUM_ARGS = ["--headless", "--no-sandbox", "--disable-gpu", "--no-first-run",
                 "--disable-background-networking", "--disable-component-update", "--disable-sync"]
HAZARD = ("hot_surfaces", "The regulator reaches 70 °C during the test; do not touch it.")


def find_chromium() -> str | None:
    for name in ("chromium", "chromium-browser"):
        found = shutil.which(name)
        if found:
            return found
    return "/usr/bin/chromium" if os.access("/usr/bin/chromium", os.X_OK) else None


def screenshot_dir() -> Path:
    folder = Path(os.environ.get("BENCHGATE_SCREENSHOTS") or REPO / "reports" / "screenshots")
    folder.mkdir(parents=True, exist_ok=True)
    return folder


def plan_text(*, hazard: bool = True, steady: str | None = None) -> str:
    """The TB-3 plan with one hazard, a short warm-up and, optionally, a longer steady capture
    (to stop it midway)."""
    text = TB3.read_text(encoding="utf-8")
    head, tail = text.split("  - id: warm-up", 1)
    text = head + "  - id: warm-up" + tail.replace("duration: 2 s", "duration: 200 ms", 1)
    if hazard:
        name, what = HAZARD
        text = text.replace("hazards: []", f"hazards:\n  - name: {name}\n    text: {what}")
    if steady is not None:
        head, tail = text.split("  - id: steady", 1)
        text = head + "  - id: steady" + tail.replace("duration: 500 ms", f"duration: {steady}", 1)
    return text


def until(page, selector: str, *, retry: bool = True):
    """Wait for ``selector``; a good unit whose start-up capture was not trusted (a loaded machine
    delays the switch-on command, which widens the start-up time's uncertainty) is retried once,
    as the plan allows and an operator would."""
    either = f'{selector}, #ask[data-kind="retry"]:not([hidden])'
    found = page.wait_for_selector(either if retry else selector)
    if retry and page.is_visible('#ask[data-kind="retry"]'):
        page.keyboard.press("Enter")
        page.wait_for_selector('#ask[data-kind="retry"]', state="hidden")
        found = page.wait_for_selector(selector)
    return found


def seen(page) -> str:
    """What the page shows now (for a failure message)."""
    return page.evaluate("""() => JSON.stringify({data: {...document.body.dataset},
        notice: document.getElementById('notice').textContent,
        ask: document.getElementById('ask').hidden ? null : document.getElementById('ask').innerText,
        live: document.getElementById('live').innerText, supply: document.getElementById('supply').innerText,
        checks: document.getElementById('checks').innerText, steps: document.getElementById('steps').innerText})""")


def wait(page, selector: str, retry: bool = True):
    try:
        return until(page, selector, retry=retry)
    except Exception as exc:
        raise AssertionError(f"{selector} did not appear; the page shows {seen(page)}") from exc


class _NoRedirect(urllib.request.HTTPRedirectHandler):
    def redirect_request(self, *args, **kwargs):
        return None


_opener = urllib.request.build_opener(_NoRedirect)


def http(url: str, method: str = "GET", headers: dict | None = None, body: bytes | None = None):
    """(status, headers, text) of one plain HTTP request (no browser, no redirects followed)."""
    req = urllib.request.Request(url, data=body, method=method, headers=headers or {})
    try:
        with _opener.open(req, timeout=10) as r:
            return r.status, r.headers, r.read().decode("utf-8", "replace")
    except urllib.error.HTTPError as err:
        return err.code, err.headers, err.read().decode("utf-8", "replace")


def origin(url: str) -> str:
    return url.rstrip("/")


def page_keys(url: str) -> tuple[str, str]:
    """The anti-forgery token in the page, and the page's identity cookie."""
    status, headers, html = http(url)
    assert status == 200
    csrf = re.search(r'name="benchgate-csrf" content="([^"]+)"', html).group(1)
    cookie = headers["set-cookie"].split(";", 1)[0]
    return csrf, cookie
