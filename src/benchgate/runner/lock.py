"""One run per station: an operating-system file lock taken before any instrument is touched.

A second ``benchgate run`` on a station that is already testing a unit must not open the supply
(opening resets it and switches its output off, which would cut the power of the unit under
test). :class:`StationLock` takes an exclusive, non-blocking ``flock`` on one lock file for each
instrument address of the station (a serial port by its real path), so a copy of the station
file under another id is caught too, while two simulated benches (which share a station id but
not their ports) never block each other. The kernel releases the locks when the process ends,
however it ends (``kill -9`` included): a lock file left behind never blocks the next run.

The lock files live in ``$BENCHGATE_RUNTIME_DIR``, else ``$XDG_RUNTIME_DIR/benchgate``, else
``<temp dir>/benchgate-<uid>``: runs by the same user on one machine exclude each other.
"""

from __future__ import annotations

import hashlib
import os
import re
import tempfile
from pathlib import Path
from typing import IO, TYPE_CHECKING

from benchgate.errors import PreflightError, StationBusy

if TYPE_CHECKING:
    from benchgate.instruments.station import Station

#: exit code of a run refused because the station is busy (nothing was touched: a usage error)
EXIT_STATION_BUSY = 2


def runtime_dir() -> Path:
    """Where the lock files live (see the module docstring)."""
    explicit = os.environ.get("BENCHGATE_RUNTIME_DIR")
    if explicit:
        return Path(explicit)
    xdg = os.environ.get("XDG_RUNTIME_DIR")
    if xdg:
        return Path(xdg) / "benchgate"
    uid = os.getuid() if hasattr(os, "getuid") else "user"
    return Path(tempfile.gettempdir()) / f"benchgate-{uid}"


def lock_name(kind: str, key: str) -> str:
    """A file name for ``key`` (readable part plus a hash, so distinct keys never share a file)."""
    readable = re.sub(r"[^A-Za-z0-9._-]+", "_", key)[:60]
    digest = hashlib.sha256(key.encode("utf-8", "surrogatepass")).hexdigest()[:12]
    return f"{kind}-{readable}-{digest}.lock"


def station_keys(station: Station) -> list[tuple[str, str]]:
    """(role, key) of every lock a station needs: one per instrument address (serial ports by
    their real path, so a symlink and its target are one port)."""
    keys: dict[str, str] = {}
    for role, config in sorted(station.instruments.items()):
        address = str(getattr(config, "address", "") or "")
        if not address:
            continue
        if address.startswith("/"):
            address = os.path.realpath(address)
        keys.setdefault(address, role)
    return [(role, address) for address, role in keys.items()]


class StationLock:
    """Exclusive locks for one station; :meth:`release` (or process death) frees them."""

    def __init__(self, station: Station, directory: Path | None = None):
        self.station_id = str(station.id)
        self.directory = Path(directory) if directory is not None else runtime_dir()
        self.keys = station_keys(station)
        self._files: list[IO[str]] = []

    def acquire(self) -> StationLock:
        """Take every lock or none; raises :class:`StationBusy` naming the holder when known."""
        import fcntl

        try:
            self.directory.mkdir(parents=True, exist_ok=True, mode=0o700)
        except OSError as exc:
            raise PreflightError(f"cannot create the lock folder: {exc.strerror}",
                                 where=str(self.directory)) from exc
        for role, key in self.keys:
            path = self.directory / lock_name("instrument", key)
            try:
                handle = open(path, "a+", encoding="utf-8")  # noqa: SIM115 - kept open while locked
            except OSError as exc:
                self.release()
                raise PreflightError(f"cannot open the lock file: {exc.strerror}", where=str(path)) from exc
            try:
                fcntl.flock(handle.fileno(), fcntl.LOCK_EX | fcntl.LOCK_NB)
            except OSError:
                holder = _holder(handle)
                handle.close()
                self.release()
                raise StationBusy(f"station busy: the {role} of station {self.station_id!r} ({key}) is in "
                                  f"use by another benchgate run{holder}; nothing was touched") from None
            handle.seek(0)
            handle.truncate()
            handle.write(f"{os.getpid()}\n")
            handle.flush()
            self._files.append(handle)
        return self

    def release(self) -> None:
        files, self._files = self._files, []
        for handle in files:
            try:
                handle.close()  # closing the descriptor drops the flock
            except OSError:
                pass

    @property
    def held(self) -> bool:
        return bool(self._files)

    def __enter__(self) -> StationLock:
        return self.acquire()

    def __exit__(self, *exc: object) -> None:
        self.release()


def _holder(handle: IO[str]) -> str:
    try:
        handle.seek(0)
        pid = handle.read(32).strip()
    except OSError:
        return ""
    return f" (pid {pid})" if pid.isdigit() else ""


def acquire_station(station: Station, directory: Path | None = None) -> StationLock:
    """Lock ``station`` now (see :class:`StationLock`)."""
    return StationLock(station, directory).acquire()


__all__ = ["EXIT_STATION_BUSY", "StationBusy", "StationLock", "acquire_station", "runtime_dir"]
