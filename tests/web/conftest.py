"""Operator-page tests: a real understudy bench, the real runner, a real server, headless Chromium.

Screenshots of each stage go to ``$BENCHGATE_SCREENSHOTS`` when set (CI keeps that folder as an
artifact), else to ``reports/screenshots/`` of the checkout (ignored by git).
"""

from __future__ import annotations

import sqlite3
from dataclasses import dataclass
from pathlib import Path

import pytest
from web_support import CHROMIUM_ARGS, SPEED, find_chromium, plan_text, screenshot_dir


@pytest.fixture(scope="session")
def chromium_path():
    path = find_chromium()
    if path is None:
        pytest.skip("no Chromium installed (Debian package: chromium); .ci/run installs it")
    return path


@pytest.fixture(scope="session")
def browser(chromium_path):
    sync_api = pytest.importorskip("playwright.sync_api")
    with sync_api.sync_playwright() as pw:
        b = pw.chromium.launch(executable_path=chromium_path, args=CHROMIUM_ARGS)
        yield b
        b.close()


@pytest.fixture(scope="session")
def ubench(tmp_path_factory):
    from benchgate.sim.bench import UnderstudyBench

    with UnderstudyBench("tb3", speed=SPEED, workdir=tmp_path_factory.mktemp("ubench")) as ub:
        yield ub


@dataclass
class Served:
    url: str
    desk: object
    thread: object
    reports: Path
    defects: dict

    def row(self, run_id: str):
        conn = sqlite3.connect(self.reports / "results.sqlite")
        try:
            return conn.execute("SELECT complete, verdict, reason FROM runs WHERE run_id = ?",
                                (run_id,)).fetchone()
        finally:
            conn.close()

    def rows(self, serial: str):
        if not (self.reports / "results.sqlite").exists():
            return []
        conn = sqlite3.connect(self.reports / "results.sqlite")
        try:
            return conn.execute("SELECT run_id, complete, verdict FROM runs WHERE serial = ? ORDER BY id",
                                (serial,)).fetchall()
        finally:
            conn.close()


@pytest.fixture
def serve_page(ubench, tmp_path):
    """Start a page for the understudy bench: ``serve_page(plan_text=..., host=..., token=...)``."""
    from benchgate.web.desk import Desk, DeskConfig
    from benchgate.web.guard import Guard
    from benchgate.web.server import ServerThread, bind

    started: list[Served] = []

    def start(text: str | None = None, host: str = "127.0.0.1", token: str | None = None,
              more: tuple[str, ...] = (), **desk_options) -> Served:
        plans = []
        for i, body in enumerate((text if text is not None else plan_text(), *more)):
            plans.append(tmp_path / f"plan-{len(started)}-{i}.yaml")
            plans[-1].write_text(body, encoding="utf-8")
        reports = tmp_path / "reports"
        defects: dict[str, str | None] = {}
        config = DeskConfig(station=ubench.station_path, plans=plans, reports_dir=reports, clock=ubench.clock,
                            before_unit=lambda serial: ubench.load_unit(serial, defects.get(serial)),
                            extra_flags={"clock_speed": SPEED}, **desk_options)
        desk = Desk(config).start()
        sock = bind(host, 0)
        guard = Guard(host, sock.getsockname()[1], token=token)
        thread = ServerThread(desk, guard, sock, reports).start()
        served = Served(thread.url, desk, thread, reports, defects)
        started.append(served)
        return served

    yield start
    for served in started:
        assert served.thread.close(), "the supply was not confirmed off when the page stopped"
    assert ubench.supply_output is False


@pytest.fixture
def context(browser):
    ctx = browser.new_context(viewport={"width": 1400, "height": 1000})
    ctx.set_default_timeout(20_000)
    yield ctx
    ctx.close()


@pytest.fixture
def shot(request):
    folder = screenshot_dir()

    def take(page, stage: str) -> Path:
        path = folder / f"{request.node.name}-{stage}.png"
        page.screenshot(path=str(path), full_page=True)
        return path
    return take
