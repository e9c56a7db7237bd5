"""How benchgate keeps its evidence: one place for the habits that reports, capture files, the
runner's records, the database and the CLI share. (The texts of a window and of value ± U are
:func:`benchgate.units.format.window_text` and :func:`~benchgate.units.format.value_text`.)

- :func:`finite` and :func:`json_safe` — NaN and infinities become None (JSON has no NaN), numpy
  values plain Python.
- :func:`utc_now` — the current UTC time as ISO 8601 with milliseconds.
- :func:`write_atomic` — write a file so that a reader never sees half of it (temporary file in
  the same folder, then an atomic rename; the temporary file is removed on any failure).
- :func:`file_sha256` and :func:`sha256_hex` — the SHA-256 of a file or of bytes, in hex.

Part of the shared bottom layer: it imports nothing of benchgate, so every layer may use it.
"""

from __future__ import annotations

import datetime as _dt
import hashlib
import math
import os
import secrets
from collections.abc import Callable, Mapping
from pathlib import Path
from typing import IO, Any

__all__ = ["file_sha256", "finite", "json_safe", "sha256_hex", "utc_now", "write_atomic"]


def finite(x: float | None) -> float | None:
    """``x`` when it is a finite number, else None (NaN and infinities cannot go into JSON)."""
    return x if x is not None and math.isfinite(x) else None


def json_safe(value: Any) -> Any:
    """``value`` with everything JSON cannot hold made plain.

    NaN and infinities become None; numpy scalars and arrays Python numbers and lists; tuples
    and sets lists; mapping keys strings; paths strings; enums their value; anything else its
    ``str``.
    """
    if value is None or isinstance(value, (bool, str, int)):
        return value
    if isinstance(value, float):  # numpy's float64 too (a float subclass): made a plain float
        return float(value) if math.isfinite(value) else None
    if isinstance(value, Mapping):
        return {str(k): json_safe(v) for k, v in value.items()}
    if isinstance(value, (list, tuple, set, frozenset)):
        return [json_safe(v) for v in value]
    if isinstance(value, os.PathLike):
        return os.fspath(value)
    tolist = getattr(value, "tolist", None)  # numpy scalars and arrays
    if callable(tolist):
        return json_safe(tolist())
    if hasattr(value, "value") and isinstance(value.value, str):  # enums such as Verdict
        return value.value
    return str(value)


def utc_now() -> str:
    """The current time, UTC, ISO 8601 with milliseconds: ``2026-12-01T10:00:00.123+00:00``."""
    return _dt.datetime.now(_dt.UTC).isoformat(timespec="milliseconds")


def write_atomic(path: str | os.PathLike[str], data: str | bytes | Callable[[IO[bytes]], None], *,
                 encoding: str = "utf-8", sync: bool = False) -> Path:
    """Write ``data`` to ``path`` so that a reader sees the old file or the whole new one.

    Parameters
    ----------
    path : path
        The file to write (its folder is created when missing).
    data : str, bytes or callable
        Text (encoded with ``encoding``), bytes, or a function that writes into the open binary
        temporary file.
    sync : bool
        Flush the data to the disk before the rename (for raw evidence such as captures, which
        must survive a power cut once the run has named them).

    Returns
    -------
    Path
        ``path``.
    """
    path = Path(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    # a fresh, unguessable name opened exclusively, with the usual permissions (0666 less the
    # umask), so the file reads like any other once renamed (mkstemp would leave it 0600)
    tmp = path.parent / f".{path.name}.{secrets.token_hex(6)}.tmp"
    fd = os.open(tmp, os.O_WRONLY | os.O_CREAT | os.O_EXCL | getattr(os, "O_BINARY", 0), 0o666)
    try:
        with os.fdopen(fd, "wb") as f:
            if callable(data):
                data(f)
            else:
                f.write(data.encode(encoding) if isinstance(data, str) else data)
            if sync:
                f.flush()
                os.fsync(f.fileno())
        os.replace(tmp, path)
    except BaseException:
        Path(tmp).unlink(missing_ok=True)
        raise
    return path


def sha256_hex(data: bytes) -> str:
    """The SHA-256 of ``data`` in hex (FIPS 180-4)."""
    return hashlib.sha256(data).hexdigest()


def file_sha256(path: str | os.PathLike[str]) -> str:
    """The SHA-256 of the file at ``path`` in hex, read in 1 MiB blocks.

    Raises
    ------
    OSError
        When the file cannot be read.
    """
    h = hashlib.sha256()
    with open(path, "rb") as f:
        for block in iter(lambda: f.read(1 << 20), b""):
            h.update(block)
    return h.hexdigest()
