"""Where a unit's evidence goes on disk: ``reports/<plan>/<serial>/<UTC time>-<verdict>.<ext>``.

A reanalysis (stored captures re-judged without hardware) is named so that nobody can take it
for a run: ``<UTC time>-reanalysis-v<plan version>-<verdict>.<ext>`` (:func:`report_tag`).

Serial numbers come from operators and barcode scanners, so they are turned into file names by
:func:`safe_name`: no path separators or traversal, no control characters, no leading dots,
bounded length, and still unique — whenever sanitising changed anything a short hash of the
original text is appended, after a ``~`` that a kept-as-is name can never contain. The serial is
kept verbatim inside the reports themselves.
"""

from __future__ import annotations

import datetime as _dt
import hashlib
import re
import unicodedata
from pathlib import Path

#: characters kept as they are in a file name; everything else becomes "_".
_KEEP = re.compile(r"[A-Za-z0-9._-]")
#: longest sanitised name before the hash suffix.
MAX_NAME = 48
#: hex digits of SHA-256 appended when sanitising changed the text (40 bits).
HASH_DIGITS = 10
#: names Windows refuses whatever the extension (a report folder may be copied there).
_RESERVED = {"CON", "PRN", "AUX", "NUL", *(f"COM{i}" for i in range(10)), *(f"LPT{i}" for i in range(10))}


def safe_name(text: str) -> str:
    """A file-name-safe, unique stand-in for ``text`` (a serial number, plan id or step id).

    Parameters
    ----------
    text : str
        Any text, including empty, Unicode, control characters or path syntax.

    Returns
    -------
    str
        ``text`` itself when it already consists of ``A–Z a–z 0–9 . _ -``, does not start with a
        dot or dash, is not a reserved device name and is at most :data:`MAX_NAME` characters;
        otherwise the sanitised text (capped) followed by ``~`` and the first
        :data:`HASH_DIGITS` hex digits of the SHA-256 of the UTF-8 original.

    Notes
    -----
    Two different inputs give different names: unchanged names contain no ``~``, and changed
    ones differ in their hash suffix (up to a 40-bit hash collision). Case is kept, so on a
    case-insensitive file system ``SN1`` and ``sn1`` share a folder (their reports still carry
    distinct serials and times).
    """
    text = str(text)
    chars = []
    for ch in unicodedata.normalize("NFC", text):
        chars.append(ch if _KEEP.fullmatch(ch) else "_")
    name = re.sub(r"_+", "_", "".join(chars))
    name = name.lstrip(".-").rstrip(".")
    name = name[:MAX_NAME].rstrip(".")
    if name == text and name and name.split(".")[0].upper() not in _RESERVED:
        return name
    digest = hashlib.sha256(text.encode("utf-8", "surrogatepass")).hexdigest()[:HASH_DIGITS]
    return f"{name or 'unnamed'}~{digest}"


def utc_stamp(started: str) -> str:
    """A compact, sortable UTC time for file names: ``20261201T223722.123Z``.

    Parameters
    ----------
    started : str
        ISO 8601 time; a time without an offset is taken as UTC.

    Raises
    ------
    ValueError
        When ``started`` is not an ISO 8601 time.
    """
    try:
        t = _dt.datetime.fromisoformat(str(started).strip())
    except ValueError:
        raise ValueError(f"start time {started!r} is not an ISO 8601 time") from None
    if t.tzinfo is None:
        t = t.replace(tzinfo=_dt.UTC)
    t = t.astimezone(_dt.UTC)
    return t.strftime("%Y%m%dT%H%M%S") + f".{t.microsecond // 1000:03d}Z"


def report_tag(record: object) -> str | None:
    """The file-name tag of a record's reports: ``reanalysis-v<plan version>`` for a reanalysis.

    ``record`` is a :class:`benchgate.record.UnitRecord` (anything with ``reanalysis_of`` and
    ``plan_version``); an ordinary run has no tag.
    """
    if not getattr(record, "reanalysis_of", None):
        return None
    return f"reanalysis-v{getattr(record, 'plan_version', '')}"


class ReportLayout:
    """File names for one run of one plan on one unit.

    Parameters
    ----------
    reports_dir : path
        Root of all reports (``reports/``).
    plan_id : str
        The plan's id (sanitised with :func:`safe_name` for the folder).
    serial : str
        The unit's serial number, verbatim (sanitised for the folder).
    started : str
        Run start, ISO 8601 UTC; gives every file of this run the same time prefix.
    """

    def __init__(self, reports_dir: str | Path, plan_id: str, serial: str, started: str):
        self.reports_dir = Path(reports_dir)
        self.plan_id = plan_id
        self.serial = serial
        self.started = started
        self.stamp = utc_stamp(started)
        self.folder = self.reports_dir / safe_name(plan_id) / safe_name(serial)

    def ensure(self) -> Path:
        """Create the unit's folder (and parents) if needed; returns it."""
        self.folder.mkdir(parents=True, exist_ok=True)
        return self.folder

    def capture_path(self, step_id: str) -> Path:
        """Where the raw capture of step ``step_id`` goes (``<time>-<step>.npz``)."""
        return self.folder / f"{self.stamp}-{safe_name(step_id)}.npz"

    def report_path(self, verdict: str, ext: str, *, tag: str | None = None) -> Path:
        """Where the report with this verdict and extension goes (``<time>-<verdict>.<ext>``).

        ``tag`` (e.g. ``reanalysis-v4``, from :func:`report_tag`) goes between the time and
        the verdict: ``<time>-<tag>-<verdict>.<ext>``.
        """
        ext = str(ext).lstrip(".")
        if not re.fullmatch(r"[a-z0-9]{1,8}", ext):
            raise ValueError(f"report extension {ext!r} must be 1 to 8 lower-case letters or digits")
        middle = f"{safe_name(tag)}-" if tag else ""
        return self.folder / f"{self.stamp}-{middle}{safe_name(str(verdict))}.{ext}"

    def relative(self, path: str | Path) -> str:
        """``path`` relative to the unit's folder, as reports name their captures."""
        return Path(path).relative_to(self.folder).as_posix()

    def __repr__(self) -> str:
        return f"ReportLayout({str(self.reports_dir)!r}, {self.plan_id!r}, {self.serial!r}, {self.started!r})"
