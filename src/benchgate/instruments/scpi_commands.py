"""SCPI command templates, station-entry errors and the error-queue error of the SCPI drivers.

Each driver has SCPI-99 style default templates; a station overrides any of them with the
instrument option ``commands: {name: "TEMPLATE {value}"}`` (see ``docs/scpi.md``).
"""

from __future__ import annotations

import string
from collections.abc import Mapping
from typing import Any

import numpy as np

from benchgate.errors import InstrumentError, PlanError

COMMON_COMMANDS: dict[str, str] = {
    "identify": "*IDN?",
    "reset": "*RST",
    "clear": "*CLS",
    "operation_complete": "*OPC?",
    "error_query": "SYST:ERR?",
}



def station_error(config, message: str) -> PlanError:
    """A problem with a station entry, at the entry's position when known."""
    return PlanError(f"{config.role}: {message}", getattr(config, "file", None) or "<station>",
                     getattr(config, "line", None))


class ScpiQueueError(InstrumentError):
    """Entries of an instrument's SCPI error queue, attributed to the command(s) that caused them.

    ``code``/``code_text`` are the first entry; ``entries`` all of them; ``command`` the command
    they are attributed to (or, when the queue had not been read since several commands, the
    last of them, with ``suspects`` listing all); ``found_before`` the command that was about to
    be sent when they were found (None when found right after ``command``).
    """

    def __init__(self, instrument: str, entries: list[tuple[int, str]], suspects: list[str], *,
                 found_before: str | None = None, note: str | None = None):
        code, text = entries[0]
        more = f" (and {len(entries) - 1} more: " + "; ".join(
            f"{c},{t!r}" for c, t in entries[1:]) + ")" if len(entries) > 1 else ""
        if len(suspects) == 1:
            cause = f"{suspects[0]!r} rejected"
        else:
            cause = ("one of " + ", ".join(repr(c) for c in suspects[-4:])
                     + (f" (and {len(suspects) - 4} earlier)" if len(suspects) > 4 else "") + " rejected")
        where = f"; found in the queue before sending {found_before!r}" if found_before else ""
        where += f"; {note}" if note else ""
        super().__init__(instrument, f"{cause}: {code},\"{text}\"{more}{where}", code=code, code_text=text)
        self.entries = list(entries)
        self.suspects = list(suspects)
        self.command = suspects[-1] if suspects else None
        self.found_before = found_before


def _fields(template: str) -> set[str]:
    return {name for _lit, name, _spec, _conv in string.Formatter().parse(template) if name}


def template_problems(overrides: Any, defaults: Mapping[str, str]) -> list[tuple[tuple[str, ...], str]]:
    """Problems with a ``commands`` option, as (key path, message) pairs.

    Unknown template names, non-text templates and placeholders the driver does not supply
    are refused.
    """
    templates = {**COMMON_COMMANDS, **defaults}
    if not isinstance(overrides, Mapping):
        return [(("commands",), "'commands' must be a mapping of template name -> text")]
    problems: list[tuple[tuple[str, ...], str]] = []
    for name, text in overrides.items():
        at = ("commands", str(name))
        if name not in templates:
            known = ", ".join(sorted(templates))
            problems.append((at, f"unknown command template {name!r} (known: {known})"))
            continue
        if not isinstance(text, str) or not text.strip():
            problems.append((at, f"command template {name!r} must be non-empty text"))
            continue
        try:
            extra = _fields(text) - _fields(templates[name])
        except ValueError as exc:
            problems.append((at, f"command template {name!r}: {exc}"))
            continue
        if extra:
            allowed = ", ".join(sorted(_fields(templates[name]))) or "none"
            problems.append((at, f"command template {name!r} uses {{{', '.join(sorted(extra))}}}"
                                 f" (placeholders allowed: {allowed})"))
    return problems


def command_templates(config, defaults: Mapping[str, str]) -> dict[str, str]:
    """Driver defaults merged with the station's ``commands`` option (checked again here, for
    entries built in code rather than read from a station file)."""
    overrides = config.option("commands") or {}
    problems = template_problems(overrides, defaults)
    if problems:
        raise station_error(config, problems[0][1])
    return {**COMMON_COMMANDS, **defaults, **{k: v.strip() for k, v in overrides.items()}}


def _format_arg(value: Any) -> str:
    if isinstance(value, bool):
        return "ON" if value else "OFF"
    if isinstance(value, (int, np.integer)):
        return str(int(value))
    if isinstance(value, (float, np.floating)):
        return f"{float(value):.10g}"
    return str(value)
