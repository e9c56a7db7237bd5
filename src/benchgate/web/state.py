"""What every open page shows, kept in one place and pushed to the pages as it changes.

The station desk (a worker thread) changes the state; the web server's event streams (on the
server's event loop) send it. :class:`Board` is the meeting point: a JSON-able dict with a
version number, and a waveform kept apart (it is large: the last capture, or the preview of
the one being taken, at most ten a second; only the newest is kept, never a queue). Each change
wakes every subscribed stream through its own event loop, so no stream ever polls.
"""

from __future__ import annotations

import asyncio
import copy
import json
import math
import threading
import time
from collections.abc import Callable
from typing import Any


def _finite(value: Any) -> Any:
    if isinstance(value, float):
        return value if math.isfinite(value) else None
    if isinstance(value, dict):
        return {k: _finite(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [_finite(v) for v in value]
    return value


def _dumps(value: Any) -> str:
    """JSON the browser can parse: a NaN or infinity that slipped through becomes null."""
    try:
        return json.dumps(value, ensure_ascii=False, allow_nan=False)
    except ValueError:
        return json.dumps(_finite(value), ensure_ascii=False, allow_nan=False)


def initial_state() -> dict[str, Any]:
    return {
        "phase": "idle",        # idle | starting | preflight | running | finished | blocked
        "station": None,        # {id, path, instruments: [...]}
        "plan": None,           # {id, version, product, title, steps, cautions, hazards}
        "plans": [],            # the plans this station may run: [{name, label, error}]
        "blocked": None,        # why no unit can be started (expired calibration, bad plan)
        "serial": None,
        "controller": None,     # tag of the page that runs the current unit
        "step": None,           # {index, total, id, title, kind}
        "progress": None,       # {fraction, text, left}
        "steps": [],            # [{id, title, kind, status, error}]
        "checks": [],           # [{step, measurement, value, window, verdict, reason}]
        "ask": None,            # {id, kind, text, hazard, index, count}
        "messages": [],         # [{kind, text}] cautions, hazards and warnings of this session
        "result": None,         # {verdict, reason, report, failed: [...], serial}
        "supply": {"state": "unknown", "text": "not checked yet"},
        "alarm": None,          # the supply could not be confirmed off: shown over everything
        "history": [],          # this unit's earlier runs
        "tally": {"tested": 0, "passed": 0, "fpy": None, "runs": 0, "top_failure": None},
        "notice": None,         # one line for the operator (refused scan, preflight refusal …)
        "session": {"hazards_acknowledged": False, "units": 0},
        "closing": False,
    }


class Board:
    """The shared page state. Thread-safe; subscribers are woken on their own event loops."""

    def __init__(self) -> None:
        self._lock = threading.Lock()
        self._state = initial_state()
        self._version = 1
        self._json = json.dumps(self._state)
        self._wave: dict[str, Any] | None = None
        self._wave_version = 0
        self._wave_json = "null"
        self._subscribers: dict[int, tuple[asyncio.AbstractEventLoop, asyncio.Event]] = {}
        self._next_sub = 0
        self._alone_since: float | None = time.monotonic()  # no page watching since then

    # ------------------------------------------------------------------ changes
    def change(self, fn: Callable[[dict[str, Any]], None]) -> None:
        """Apply ``fn`` to the state under the lock, then wake every page."""
        with self._lock:
            fn(self._state)
            self._version += 1
            self._json = _dumps(self._state)
        self._wake()

    def update(self, **fields: Any) -> None:
        self.change(lambda s: s.update(fields))

    def set_wave(self, wave: dict[str, Any] | None) -> None:
        with self._lock:
            self._put_wave(wave)
        self._wake()

    def end_recording(self) -> None:
        """The step ended while its capture's preview was shown: say it is no longer recording."""
        with self._lock:
            if not (self._wave and self._wave.get("recording")):
                return
            self._put_wave({**self._wave, "recording": False, "ended": True})
        self._wake()

    def _put_wave(self, wave: dict[str, Any] | None) -> None:
        """The new waveform, its version and its JSON (the caller holds the lock)."""
        self._wave = wave
        self._wave_version += 1
        self._wave_json = _dumps(wave)

    # ------------------------------------------------------------------ reads
    def get(self, key: str) -> Any:
        with self._lock:
            return copy.deepcopy(self._state[key])

    def snapshot(self) -> tuple[int, str]:
        with self._lock:
            return self._version, self._json

    def wave(self) -> tuple[int, str]:
        with self._lock:
            return self._wave_version, self._wave_json

    # ------------------------------------------------------------------ subscribers
    def subscribe(self, loop: asyncio.AbstractEventLoop, event: asyncio.Event) -> int:
        with self._lock:
            self._next_sub += 1
            self._subscribers[self._next_sub] = (loop, event)
            self._alone_since = None
            return self._next_sub

    def unsubscribe(self, token: int) -> None:
        with self._lock:
            self._subscribers.pop(token, None)
            if not self._subscribers and self._alone_since is None:
                self._alone_since = time.monotonic()

    def unwatched_for(self) -> float:
        """Seconds since the last page stopped watching (0 while one watches)."""
        with self._lock:
            return 0.0 if self._alone_since is None else time.monotonic() - self._alone_since

    def _wake(self) -> None:
        with self._lock:
            subs = list(self._subscribers.values())
        for loop, event in subs:
            try:
                loop.call_soon_threadsafe(event.set)
            except RuntimeError:  # that loop has closed; its stream is gone
                pass
