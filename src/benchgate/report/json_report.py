"""The JSON unit report: ``UnitRecord.to_dict()`` written as strict JSON, and read back.

The body follows ``schemas/unit-report.schema.json`` (JSON Schema draft 2020-12). Values that
JSON cannot carry (NaN, infinities) become ``null``; numpy scalars and arrays become numbers and
lists, so a measurement's ``details`` never break the file.
"""

from __future__ import annotations

import json
import re
from pathlib import Path
from typing import Any

from benchgate.common.evidence import json_safe, write_atomic
from benchgate.errors import ReportError
from benchgate.record import UnitRecord

SCHEMA_FILE = "unit-report.schema.json"



def report_dict(record: UnitRecord) -> dict[str, Any]:
    """The JSON body of ``record``'s report."""
    return json_safe(record.to_dict())


def write_json(record: UnitRecord, path: str | Path) -> Path:
    """Write ``record`` as a JSON report to ``path`` (atomically: a crash leaves no half file).

    Returns
    -------
    Path
        ``path``.
    """
    text = json.dumps(report_dict(record), indent=2, ensure_ascii=False, allow_nan=False)
    return write_atomic(path, _one_line_arrays(text) + "\n")


#: an indented JSON array of numbers only (a raw newline never occurs inside a JSON string).
_NUMBER_ARRAY = re.compile(r"\[\n(?:\s*(?:-?[0-9][0-9.eE+-]*|null),\n)*\s*(?:-?[0-9][0-9.eE+-]*|null)\n\s*\]")


def _one_line_arrays(text: str) -> str:
    """Arrays of numbers (plot views) on one line each, the rest indented for reading."""
    return _NUMBER_ARRAY.sub(lambda m: "[" + ", ".join(m.group(0)[1:-1].split()).replace(",,", ",") + "]", text)


def read_json(path: str | Path) -> UnitRecord:
    """Read a JSON unit report back into a :class:`UnitRecord`.

    Raises
    ------
    ReportError
        When the file is missing, not JSON (with line and column), or not a benchgate unit report.
    """
    path = Path(path)
    try:
        text = path.read_text(encoding="utf-8")
    except FileNotFoundError:
        raise ReportError("no such report file", str(path)) from None
    except (OSError, UnicodeDecodeError) as exc:
        raise ReportError(f"cannot read report: {exc}", str(path)) from None
    try:
        data = json.loads(text)
    except json.JSONDecodeError as exc:
        raise ReportError(f"not valid JSON: {exc.msg}", str(path), exc.lineno, exc.colno) from None
    if not isinstance(data, dict):
        raise ReportError("not a benchgate unit report (top level is not an object)", str(path))
    try:
        return UnitRecord.from_dict(data)
    except ValueError as exc:
        raise ReportError(str(exc), str(path)) from None
    except (KeyError, TypeError) as exc:
        raise ReportError(f"not a complete benchgate unit report (missing or bad field {exc})", str(path)) from None


def load_schema() -> dict[str, Any]:
    """The unit report's JSON Schema as a dict."""
    return json.loads(schema_path().read_text(encoding="utf-8"))


def schema_path() -> Path:
    """Where the unit report's JSON Schema file is (``benchgate/schemas/``)."""
    return Path(__file__).resolve().parent.parent / "schemas" / SCHEMA_FILE
