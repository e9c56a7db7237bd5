"""SCPI command templates and station-entry errors of the SCPI drivers.

Each driver has SCPI-99 style default templates; a station overrides any of them with the
instrument option ``commands: {name: "TEMPLATE {value}"}`` (see ``docs/scpi.md``).
"""

from __future__ import annotations

import string
from collections.abc import Mapping
from typing import Any

import numpy as np

from benchgate.errors import StationError

COMMON_COMMANDS: dict[str, str] = {
    "identify": "*IDN?",
    "reset": "*RST",
    "clear": "*CLS",
    "operation_complete": "*OPC?",
    "error_query": "SYST:ERR?",
}



def station_error(config, message: str) -> StationError:
    """A problem with a station entry, at the entry's position when known."""
    return StationError(f"{config.role}: {message}", getattr(config, "file", None) or "<station>",
                        getattr(config, "line", None))


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
