"""Offline-safe stations: every run goes to the local SQLite file first, then to the server.

:class:`ForwardingDB` is what a station writes through when its results database is a
``postgresql://`` URL. ``begin_run`` and ``finish_run`` complete on the local file exactly as
without a server; then the runs not yet sent (the local ``runs.sent`` marks: 1 = the begun row
was sent, 2 = the finished run) go to the server in batches. A batch is one transaction there,
idempotent by run id (:meth:`~benchgate.store.db.ResultsDB.import_runs`), and is marked sent
locally only after the server committed it: a crash in between sends it again, which changes
nothing. When the server cannot be reached the run still completes, the operator is told once
that results are queued, and the next run (after :data:`RETRY_S`) or ``benchgate sync``
sends the backlog.
"""

from __future__ import annotations

import time
from collections.abc import Callable
from dataclasses import dataclass
from typing import Any

from benchgate.errors import ServerUnreachable, StoreError
from benchgate.store.backend import redact, scrub
from benchgate.store.db import ResultsDB

#: runs per transaction on the server
BATCH = 200
#: after a failed attempt, a station tries the server again after this many seconds
RETRY_S = 30.0
#: connection timeout for a station forwarding between units (sync waits longer)
STATION_CONNECT_TIMEOUT_S = 3


@dataclass
class SyncResult:
    sent: int  # run states stored on the server
    left: int  # still queued
    failed: list[tuple[str, str]]  # (run id, reason) refused by the server (not a network fault)


def send_pending(local: ResultsDB, central: ResultsDB, *, limit: int | None = None) -> SyncResult:
    """Send the local queue to ``central`` (batches of :data:`BATCH`); raises :class:`StoreError`
    with ``offline`` set when the server goes away (what was committed stays marked sent)."""
    sent, failed = 0, []
    skip: set[str] = set()
    while limit is None or sent < limit:
        todo = [(r, s) for r, s in local.pending(limit=BATCH + len(skip)) if r not in skip][:BATCH]
        if not todo:
            break
        batch = local.export_runs([r for r, _ in todo])
        try:
            central.import_runs(batch)
            local.mark_sent(todo)
            sent += len(todo)
        except StoreError as exc:
            if isinstance(exc, ServerUnreachable):
                raise
            # one run the server refuses must not hold back the others: send one at a time
            for (run_id, state), one in zip(todo, batch, strict=False):
                try:
                    central.import_runs([one])
                    local.mark_sent([(run_id, state)])
                    sent += 1
                except StoreError as exc1:
                    if isinstance(exc1, ServerUnreachable):
                        raise
                    failed.append((run_id, exc1.message))
                    skip.add(run_id)
    return SyncResult(sent, local.count_pending(), failed)


class ForwardingDB:
    """A station's results database: the local SQLite file, forwarded to a central server."""

    def __init__(self, local: ResultsDB, url: str, *, notify: Callable[[str], None],
                 clock: Callable[[], float] = time.monotonic):
        self.local = local
        self.url = url
        self.notify = notify
        self.clock = clock
        self._central: ResultsDB | None = None
        self._retry_at = 0.0
        self._told_queued = False
        self.path = local.path

    # the runner's interface -------------------------------------------------------------
    def begin_run(self, record: Any) -> None:
        self.local.begin_run(record)
        self.forward()

    def finish_run(self, record: Any, report_path: Any) -> None:
        self.local.finish_run(record, report_path)
        self.forward()

    def close(self) -> None:
        if self._central is not None:
            self._central.close()
            self._central = None
        self.local.close()

    def __enter__(self) -> ForwardingDB:
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()

    def __getattr__(self, name: str) -> Any:  # summary, history, pending... from the local file
        return getattr(self.local, name)

    # forwarding ----------------------------------------------------------------------------
    def forward(self) -> SyncResult | None:
        """Send what is queued, unless the server failed less than :data:`RETRY_S` ago.

        Never raises for a server that is down or refuses: the run is safe in the local file.
        """
        if self.clock() < self._retry_at:
            return None
        try:
            if self._central is None:
                self._central = ResultsDB.open(self.url, connect_timeout=STATION_CONNECT_TIMEOUT_S)
            result = send_pending(self.local, self._central)
        except StoreError as exc:
            self._offline(exc)
            return None
        except Exception as exc:  # noqa: BLE001 - forwarding must never break a run: it is queued
            self._offline(StoreError(scrub(f"forwarding failed: {type(exc).__name__}: {exc}", self.url)))
            return None
        if result.failed and not self._told_queued:
            self._told_queued = True
            self.notify(f"the results server refused {len(result.failed)} run(s) "
                        f"({result.failed[0][1]}); they stay in {self.local.path}")
        elif self._told_queued and not result.left:
            self._told_queued = False
            self.notify(f"queued results sent to {redact(self.url)}")
        return result

    def _offline(self, exc: StoreError) -> None:
        if self._central is not None:
            self._central.close()
            self._central = None
        self._retry_at = self.clock() + RETRY_S
        if not self._told_queued:
            self._told_queued = True
            n = self.local.count_pending()
            self.notify(f"results server not reachable ({exc.one_line()}); {n} run"
                        f"{'s' if n != 1 else ''} queued in {self.local.path}, sent by the next "
                        "run or 'benchgate sync'")


def sync(local: ResultsDB, url: str, *, resend: bool = False) -> SyncResult:
    """``benchgate sync``: send this station's queue to the server at ``url`` now."""
    if resend:
        local.mark_all_unsent()
    with ResultsDB.open(url) as central:
        return send_pending(local, central)
