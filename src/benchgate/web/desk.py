"""One station's desk: the worker thread that runs units for the operator page, one at a time.

The desk owns the runner (the same :class:`~benchgate.runner.session.Runner` as ``benchgate
run``, made lazily at the first unit of a session, when preflight asks for the hazards) and
runs every unit in its own thread, so the runner's database connection and the bench stay in
one thread while the web server answers pages. Requests from pages arrive as method calls from
any thread and either change nothing or queue work for the thread.

Safety: Stop (from any page, at any time) interrupts the run as Ctrl-C does; when nothing runs
it opens the supply, switches its output off and asks it. :meth:`Desk.shutdown` stops a run in
progress, waits until the runner has made the bench safe, and confirms the supply is off.
"""

from __future__ import annotations

import datetime as _dt
import queue
import threading
from collections.abc import Callable
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from benchgate.errors import BenchgateError
from benchgate.web import lot
from benchgate.web.face import PageFace, Stop, StoppableClock
from benchgate.web.state import Board
from benchgate.web.wiring import confirm_supply_off, make_runner

_ACTIVE = ("starting", "preflight", "running")
MAX_SERIAL = 120


@dataclass
class DeskConfig:
    """How the desk runs: the station file, the plans it may run, where evidence goes."""

    station: Path
    plans: list[Path]
    reports_dir: Path = Path("reports")
    db_path: str | Path | None = None  # the results database: a SQLite file or a postgresql:// URL
    operator: str | None = None
    lot: str | None = None
    allow_expired_calibration: bool = False
    clock: Any = None
    before_unit: Callable[[str], None] | None = None  # e.g. the understudy bench loads the unit
    probe: bool = True  # open the instruments once at start: identities, supply confirmed off
    abandon_after: float | None = 120.0  # s a question may wait with no page open before Stop
    extra_flags: dict[str, Any] = field(default_factory=dict)


def _now() -> str:
    return _dt.datetime.now(_dt.UTC).strftime("%H:%M:%S UTC")


class Desk:
    """Runs units of the chosen plan at one station for the pages. Call :meth:`start` once."""

    def __init__(self, config: DeskConfig):
        from benchgate.instruments import load_station

        if not config.plans:
            raise ValueError("the desk needs at least one plan")
        self.config = config
        self.station = load_station(config.station)
        self.board = Board()
        self.stop_request = Stop()
        self.plans: list[tuple[Path, Any, str | None]] = [self._load(p) for p in config.plans]
        if all(plan is None for _, plan, _ in self.plans):  # nothing to offer: say why, at its place
            from benchgate.plan import load_plan

            load_plan(str(config.plans[0]))
        self.plan_index = next((i for i, p in enumerate(self.plans) if p[1] is not None), 0)
        self.face = PageFace(self.board, self.stop_request, self.plans[self.plan_index][1],
                             abandon_after=config.abandon_after)
        self.runner: Any = None
        self.tally = lot.Tally()
        self.identities: dict[str, str | None] = {}
        self.closing = False
        self._lock = threading.Lock()
        self._busy = False
        self._idle = threading.Event()
        self._idle.set()
        self._supply_said = False
        self._supply_state = "unknown"
        self._queue: queue.Queue = queue.Queue()
        self._thread = threading.Thread(target=self._work, name="benchgate-desk", daemon=False)
        self._station_lock: Any = None
        self._hold_station()  # StationBusy when another benchgate runs here: nothing was touched
        self._show_plan()
        self._show_station()

    # ------------------------------------------------------------------ the station lock
    def _hold_station(self) -> None:
        """Lock the station while no runner holds it (the probe and Stop open the supply too)."""
        if self._station_lock is None and self.runner is None:
            from benchgate.runner.lock import StationLock

            self._station_lock = StationLock(self.station).acquire()

    def _let_go_station(self) -> None:
        if self._station_lock is not None:
            self._station_lock.release()
            self._station_lock = None

    # ------------------------------------------------------------------ set-up
    @staticmethod
    def _load(path: Path) -> tuple[Path, Any, str | None]:
        from benchgate.plan import load_plan

        try:
            return path, load_plan(str(path)), None
        except BenchgateError as exc:
            return path, None, exc.one_line()

    @property
    def plan(self) -> Any:
        return self.plans[self.plan_index][1]

    def _show_plan(self) -> None:
        info, listing, blocked = lot.plan_view(self.plans, self.plan_index, self.station,
                                               self.config.allow_expired_calibration)
        self.board.update(plan=info, plans=listing, blocked=blocked)

    def _show_station(self) -> None:
        today = _dt.datetime.now(_dt.UTC).date()
        self.board.update(station={"id": self.station.id, "path": str(self.station.path),
                                   "instruments": lot.instruments(self.station, self.identities, today)})

    def start(self) -> Desk:
        self._thread.start()
        return self

    # ------------------------------------------------------------------ requests (any thread)
    def scan(self, serial: str, client: str) -> tuple[int, str]:
        """Start testing unit ``serial`` for the page ``client``: (HTTP status, message)."""
        serial = str(serial).strip()
        if not serial:
            return 400, "scan or type a serial number"
        if len(serial) > MAX_SERIAL or any(ord(c) < 32 or ord(c) == 127 for c in serial):
            return 400, f"a serial number is one line of at most {MAX_SERIAL} printable characters"
        with self._lock:
            if self.closing:
                return 503, "the station is shutting down"
            if self.board.get("blocked"):
                return 409, "testing is blocked at this station: " + self.board.get("blocked")
            if self._busy:
                return 409, "a unit is being tested at this station; wait for its verdict"
            self._busy = True
            self._idle.clear()
            self.stop_request.clear()
        self.board.update(phase="starting", serial=serial, controller=client, notice=None, result=None,
                          ask=None, checks=[], step=None, progress=None, history=[])
        self.board.set_wave(None)
        self._queue.put(("unit", serial))
        return 202, "started"

    def retest(self, client: str) -> tuple[int, str]:
        serial = self.board.get("serial")
        if not serial or self.board.get("phase") != "finished":
            return 409, "no finished unit to test again"
        return self.scan(serial, client)

    def answer(self, ask_id: int, answer: str, client: str) -> tuple[int, str]:
        if self.board.get("controller") != client:
            return 403, "this screen is watching: the unit is run from another screen"
        if not self.face.answer(ask_id, str(answer)):
            return 409, "that question is no longer open"
        return 200, "answered"

    def stop(self, why: str = "Stop pressed on the operator page") -> tuple[int, str]:
        """Stop the run (any page may); with nothing running, switch the supply off and ask it."""
        with self._lock:
            busy = self._busy
            self.stop_request.request(why)
        self.face.wake()
        self.board.update(supply={"state": "stopping", "text": "stopping: switching the supply off …",
                                  "at": _now()})
        if not busy:
            self._queue.put(("off", None))
        return 202, "stopping"

    def choose_plan(self, name: str, client: str) -> tuple[int, str]:
        names = [p.name for p, _, _ in self.plans]
        if name not in names:
            return 404, "no such plan at this station"
        with self._lock:
            if self._busy:
                return 409, "a unit is being tested; choose the plan after its verdict"
            self._busy = True
        self._queue.put(("plan", names.index(name)))
        return 202, "plan chosen"

    def new_session(self, client: str) -> tuple[int, str]:
        with self._lock:
            if self._busy:
                return 409, "a unit is being tested; start a new session after its verdict"
            self._busy = True
        self._queue.put(("session", None))
        return 202, "new session"

    def wait_idle(self, timeout: float | None = None) -> bool:
        """Wait until no unit is queued or running (True) or ``timeout`` s passed (False)."""
        return self._idle.wait(timeout)

    def begin_shutdown(self, why: str = "the operator page's server is stopping") -> None:
        """Refuse new work and stop a run in progress (safe to call from a signal handler)."""
        self.closing = True
        self.stop_request.request(why)
        self.face.wake()
        self.board.update(closing=True)

    def shutdown(self, timeout: float = 60.0) -> bool:
        """Stop, wait until the bench is safe and the supply confirmed off; True when it is."""
        self.begin_shutdown()
        if self._thread.ident is not None:  # started: the worker lets the station go last
            self._queue.put(None)
            self._thread.join(timeout)
        else:  # never started: nothing was opened, only the lock was taken
            self._let_go_station()
            return True
        return not self._thread.is_alive() and self._supply_state in ("off", "none")

    # ------------------------------------------------------------------ the worker
    def _work(self) -> None:
        try:
            if self.config.probe:
                self._probe()
            while True:
                item = self._queue.get()
                if item is None:
                    break
                kind, arg = item
                try:
                    if kind == "unit":
                        self._run_unit(arg)
                    elif kind == "off":
                        self._confirm_now("STOP: ")
                    elif kind == "plan":
                        self._close_runner()
                        self.plan_index = arg
                        self.face.plan = self.plan
                        self._show_plan()
                        self.board.update(phase="idle", result=None, serial=None, checks=[], steps=[])
                    elif kind == "session":
                        self._close_runner()
                        self.tally = lot.Tally()
                        self.board.update(phase="idle", tally=self.tally.to_dict(), messages=[], result=None,
                                          serial=None, checks=[], steps=[],
                                          session={"hazards_acknowledged": False, "units": 0})
                except BaseException as exc:  # noqa: BLE001 - the desk goes on; the page says why
                    self.board.update(phase="idle", ask=None,
                                      notice=f"internal error: {type(exc).__name__}: {exc}")
                finally:
                    with self._lock:
                        self._busy = False
                        self._idle.set()
        finally:
            self._close_runner()
            if self._supply_state not in ("off", "none"):
                self._confirm_now()
            self._let_go_station()

    def _confirmed(self, state: str, text: str) -> None:
        self._supply_said = True
        self._supply_state = state
        self.board.update(supply={"state": state, "text": text, "at": _now()})
        if state in ("off", "none"):
            self.board.update(alarm=None)
        elif state in ("on", "unknown"):  # not confirmed off: the page says so over everything
            self.board.update(alarm=text)

    def _confirm_now(self, why: str = "") -> None:
        """Open the supply alone, switch its output off, ask it (Stop with no run, shutdown)."""
        from benchgate.instruments import open_station

        def confirmed(state: str, text: str) -> None:
            self._confirmed(state, why + text)

        if "supply" not in self.station.instruments:
            confirmed("none", "this station has no supply")
            return
        try:
            with open_station(self.station, clock=self.config.clock, roles=["supply"]) as bench:
                confirm_supply_off(bench, confirmed)
        except Exception as exc:  # noqa: BLE001 - said on the page, loudly
            text = exc.one_line() if isinstance(exc, BenchgateError) else f"{type(exc).__name__}: {exc}"
            confirmed("unknown", f"cannot reach the supply ({text}): switch it off by hand")
        self.stop_request.clear()

    def _probe(self) -> None:
        """Open every instrument once: identities for the page, and the supply confirmed off."""
        from benchgate.instruments import open_station

        try:
            with open_station(self.station, clock=self.config.clock) as bench:
                for role in bench.roles:
                    self.identities[role] = getattr(bench.get(role), "identity", None) or "(no identity reported)"
                confirm_supply_off(bench, self._confirmed)
        except Exception as exc:  # noqa: BLE001 - the page says why; the desk still serves
            text = exc.one_line() if isinstance(exc, BenchgateError) else f"{type(exc).__name__}: {exc}"
            self.board.update(notice=f"instruments: {text}")
            self._confirmed("unknown", "the instruments could not all be opened: check the supply by hand")
        self._show_station()

    def _close_runner(self) -> None:
        if self.runner is not None:
            try:
                self.runner.close()
            finally:
                self.runner = None
                try:
                    self._hold_station()
                except BenchgateError as exc:  # taken over between the two: say so
                    self.board.update(notice=exc.one_line())

    def _get_runner(self) -> Any:
        if self.runner is None:
            from benchgate.clock import SystemClock
            from benchgate.runner.options import RunOptions

            c = self.config
            options = RunOptions(
                operator=c.operator, lot=c.lot, reports_dir=Path(c.reports_dir), db_path=c.db_path,
                allow_expired_calibration=c.allow_expired_calibration,
                clock=StoppableClock(c.clock or SystemClock(), self.stop_request),
                extra_flags={"face": "operator page", **c.extra_flags})
            self.face.new_session()
            self.board.update(phase="preflight")
            self._let_go_station()  # the runner takes the station's lock itself
            try:
                self.runner = make_runner(self.plan, self.station, options, self.face, self._on_capture,
                                          self._confirmed)
            except BaseException:
                try:
                    self._hold_station()
                except BenchgateError as exc:
                    self.board.update(notice=exc.one_line())
                raise
            self.board.change(lambda s: s["session"].update(hazards_acknowledged=bool(self.plan.hazards)))
        return self.runner

    def _history(self, serial: str, skip_run: str | None = None) -> list[dict]:
        """The unit's earlier runs; a database that cannot be read is said, never fatal."""
        c = self.config
        try:
            return lot.history(c.db_path, c.reports_dir, serial, skip_run=skip_run,
                               station=getattr(self.station, "results", None))
        except Exception as exc:  # noqa: BLE001 - the run goes on without its history
            self.board.update(notice=f"earlier runs cannot be read: {exc}")
            return []

    def _on_capture(self, capture: Any, path: Any) -> None:
        step = self.board.get("step")
        self.board.set_wave(lot.wave_picture(capture, None if step is None else step["id"]))

    def _run_unit(self, serial: str) -> None:
        c = self.config
        self.board.update(history=self._history(serial))
        try:
            if c.before_unit is not None:
                c.before_unit(serial)
            runner = self._get_runner()
        except KeyboardInterrupt:
            self.board.update(phase="idle", ask=None, serial=None,
                              notice="stopped before the unit was started: nothing was switched on")
            self._confirm_now()
            return
        except BenchgateError as exc:
            where = exc.where() if hasattr(exc, "where") else None
            text = exc.one_line() if hasattr(exc, "one_line") else str(exc)
            self.board.update(phase="idle", ask=None, serial=None,
                              notice=text if not where or str(where) in text else f"{where}: {text}")
            return
        self._supply_said = False
        self.board.update(phase="running", supply={"state": "run", "text": "the run controls the supply",
                                                   "at": _now()})
        outcome = runner.run(serial)
        if not self._supply_said:  # the bench never opened: ask the supply now
            self._confirm_now()
        self.stop_request.clear()
        self._show_outcome(outcome)

    def _show_outcome(self, outcome: Any) -> None:
        rec = outcome.record
        self.tally.add(rec)
        result = lot.outcome_view(outcome, self.config.reports_dir)
        earlier = self._history(rec.serial, skip_run=rec.run_id)
        self.board.change(lambda s: (
            s.update(phase="finished", result=result, step=None, progress=None, ask=None,
                     tally=self.tally.to_dict(), history=earlier),
            s["session"].update(units=s["session"]["units"] + 1)))
