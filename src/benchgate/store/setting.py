"""Which results database a command uses: the one setting, and the one function that opens it.

The setting is a file path (SQLite) or a ``postgresql://`` URL (a central PostgreSQL database).
It comes from, first to last: the command's option (``--db``, ``--bench-db``), the environment
variable ``BENCHGATE_DB``, the station file's ``results`` key (where a station is in play), and
the default ``<reports>/results.sqlite``.

With a URL, a station that *writes* runs still writes every run to its local SQLite file first
(the default path: its queue) and forwards it to the central database (:mod:`.forward`), so a
server that is down never costs a run. A command that *reads* (``history``, ``summary``) reads
the central database, and says when the local queue holds runs not yet sent.
"""

from __future__ import annotations

import logging
import os
from collections.abc import Callable
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from benchgate.errors import StoreError
from benchgate.store.backend import is_url, path_in_url_is_suspicious, redact

ENV_VAR = "BENCHGATE_DB"
DEFAULT_LOCAL = Path("reports") / "results.sqlite"


@dataclass(frozen=True)
class Setting:
    """The results database a command was told to use."""

    central: str | None  # postgresql:// URL, or None for a station with only its SQLite file
    local: Path  # the SQLite file: the database itself, or the station's queue for ``central``
    source: str  # where it came from: "option", BENCHGATE_DB, "station file" or "default"

    def shown(self) -> str:
        """For messages: the file, or the URL without its password."""
        return redact(self.central) if self.central else str(self.local)


def resolve(option: str | os.PathLike[str] | None = None, *,
            local_default: str | os.PathLike[str] = DEFAULT_LOCAL,
            station: str | None = None) -> Setting:
    """The setting from the option, else ``BENCHGATE_DB``, else ``station`` (the station file's
    ``results``, already checked by the station loader), else the default file."""
    source = "option"
    value: Any = option
    if value is None or str(value) == "":
        value, source = os.environ.get(ENV_VAR) or None, ENV_VAR
    if value is None and station:
        value, source = station, "station file"
    if value is None:
        return Setting(None, Path(local_default), "default")
    text = str(value)
    if is_url(text):
        return Setting(text, Path(local_default), source)
    if path_in_url_is_suspicious(text):
        scheme = text.split("://", 1)[0]
        raise StoreError(f"results database {scheme}://…: only a file path (SQLite) or a "
                         "postgresql:// URL is understood", source)
    return Setting(None, Path(text), source)


def _warn(message: str) -> None:
    """The default way a station's store tells the operator something: a warning on the
    ``benchgate.store`` logger (on standard error unless the program routes logging elsewhere;
    the store itself never prints)."""
    logging.getLogger("benchgate.store").warning("benchgate: %s", message)


def open_results(option: str | os.PathLike[str] | None = None, *,
                 local_default: str | os.PathLike[str] = DEFAULT_LOCAL, role: str = "writer",
                 notify: Callable[[str], None] | None = None, station: str | None = None,
                 reports: str | os.PathLike[str] | None = None) -> Any:
    """Open "the results database" (see the module text) for ``role`` ``writer`` or ``reader``.

    A writer gets a :class:`~benchgate.store.db.ResultsDB` on its SQLite file, or with a URL a
    :class:`~benchgate.store.forward.ForwardingDB` (local first, then the server); ``notify``
    receives the one-line messages for the operator (default: a logged warning, on standard error). A reader gets
    the database to read (the file must exist, the server must have the schema). ``station``
    is the station file's ``results`` (see :func:`resolve`); ``reports`` the station's report
    folder, so that a writer stores each report's path relative to it as well.
    """
    from benchgate.store.db import ResultsDB

    setting = resolve(option, local_default=local_default, station=station)
    if role == "reader":
        return ResultsDB.open(setting.central or setting.local, create=False)
    if role != "writer":
        raise ValueError(f"role must be writer or reader, got {role!r}")
    local = ResultsDB.open(setting.local)
    local.reports_dir = None if reports is None else Path(reports)
    if setting.central is None:
        return local
    from benchgate.store.forward import ForwardingDB

    return ForwardingDB(local, setting.central, notify=notify or _warn)


def unsent_note(option: str | os.PathLike[str] | None = None, *,
                local_default: str | os.PathLike[str] = DEFAULT_LOCAL,
                station: str | None = None) -> tuple[int, str | None]:
    """(runs in the local queue not yet sent, a one-line note for the reader or None).

    Only meaningful when the setting is a URL: the local file is then this station's queue.
    """
    setting = resolve(option, local_default=local_default, station=station)
    if setting.central is None or not setting.local.is_file():
        return 0, None
    from benchgate.store.db import ResultsDB

    try:
        with ResultsDB.open(setting.local, create=False) as local:
            n = local.count_pending()
    except StoreError as exc:
        return 0, f"note: cannot read this station's queue ({exc.one_line()})"
    if not n:
        return 0, None
    return n, (f"note: {n} run{'s' if n != 1 else ''} recorded at this station "
               f"{'are' if n != 1 else 'is'} not yet in {setting.shown()} (queued in "
               f"{setting.local}; 'benchgate sync' sends them)")
