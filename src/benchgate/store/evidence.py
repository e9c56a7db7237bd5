"""The evidence behind a stored run: where its report is, and whether a copy is the one stored.

Reports and captures stay files at the station. The database keeps each report's path relative
to the station's report folder (``report_file``, POSIX separators) and its SHA-256, so a central
user can ask the station (or a shared folder holding a copy of its report folder) for the file
and check it is the one the run wrote. Rows from before schema version 6 have only the path as
the station wrote it (``report_path``); an absolute one is checked where it points.
"""

from __future__ import annotations

import os
from dataclasses import dataclass
from pathlib import Path, PurePosixPath

from benchgate.store.db import file_sha256

VERIFIED, MISMATCH, MISSING, UNKNOWN = "verified", "mismatch", "missing", "unknown"


def relative_report(report_path: str | os.PathLike[str] | None,
                    reports_dir: str | os.PathLike[str] | None) -> str | None:
    """``report_path`` relative to ``reports_dir`` (POSIX separators), or None when there is no
    report, no folder, or the report lies outside the folder."""
    if report_path is None or reports_dir is None:
        return None
    try:
        rel = Path(report_path).resolve().relative_to(Path(reports_dir).resolve())
    except (ValueError, OSError):
        return None
    return rel.as_posix()


@dataclass(frozen=True)
class Evidence:
    """What checking one run's report found: ``status`` is verified, mismatch, missing or
    unknown (nothing to check against); ``path`` the file looked at (None when none)."""

    status: str
    path: Path | None
    detail: str

    @property
    def ok(self) -> bool:
        return self.status == VERIFIED


def verify_report(run: object, folder: str | os.PathLike[str]) -> Evidence:
    """Check ``run``'s report (a stored run: ``report_file``, ``report_path``, ``report_sha256``)
    under ``folder`` (a copy of the station's report folder) against the stored SHA-256.

    The stored relative path comes from a database and is not trusted: one that is absolute or
    climbs out of ``folder`` is refused (status unknown), never followed.
    """
    sha = getattr(run, "report_sha256", None)
    rel = getattr(run, "report_file", None)
    old = getattr(run, "report_path", None)
    if rel:
        parts = PurePosixPath(rel).parts
        if PurePosixPath(rel).is_absolute() or ".." in parts or "\\" in rel or not parts:
            return Evidence(UNKNOWN, None, "the stored report path is not inside a report folder")
        path = Path(folder) / Path(*parts)
    elif old and Path(old).is_absolute():  # written before schema 6: where the station put it
        path = Path(old)
    else:
        return Evidence(UNKNOWN, None, "no report path relative to the report folder is stored")
    if not sha:
        return Evidence(UNKNOWN, path, "no SHA-256 was stored for this report")
    found = file_sha256(path) if path.is_file() else None
    if found is None:
        return Evidence(MISSING, path, "report file not found")
    if found != sha:
        return Evidence(MISMATCH, path, f"SHA-256 {found[:16]}… differs from the stored {sha[:16]}…")
    return Evidence(VERIFIED, path, f"SHA-256 {sha[:16]}… matches")
