"""SCPI program-message parsing for the emulated instruments: header patterns with short and
long forms and optional nodes, numeric and boolean parameters, and the errors they raise
(SCPI-99 numbers). Nothing here touches sockets or instrument state.
"""

from __future__ import annotations

import re
from collections.abc import Callable
from dataclasses import dataclass

import numpy as np

#: standard texts of the error numbers the emulation raises (SCPI-99, from memory)
ERROR_TEXTS: dict[int, str] = {
    0: "No error",
    -102: "Syntax error",
    -104: "Data type error",
    -108: "Parameter not allowed",
    -109: "Missing parameter",
    -113: "Undefined header",
    -222: "Data out of range",
    -224: "Illegal parameter value",
    -230: "Data corrupt or stale",
    -350: "Queue overflow",
}


class ScpiCommandError(Exception):
    """A command the emulated instrument refuses; ends up in its error queue."""

    def __init__(self, code: int, detail: str | None = None):
        text = ERROR_TEXTS.get(code, "Error")
        super().__init__(f"{code},{text}")
        self.code = code
        self.text = f"{text}; {detail}" if detail else text


# ----------------------------------------------------------------------------- headers

_NODE = re.compile(r"\[:?([A-Za-z]+):?\]|:?([A-Za-z]+)")


def _compile(spec: str) -> tuple[tuple[str, str, bool], ...]:
    """``"[SOURce:]VOLTage[:LEVel]"`` -> ((long, short, optional), ...)."""
    nodes = []
    pos = 0
    while pos < len(spec):
        m = _NODE.match(spec, pos)
        if not m:
            raise ValueError(f"bad header spec {spec!r} at {pos}")
        word = m.group(1) or m.group(2)
        short = "".join(ch for ch in word if ch.isupper())
        nodes.append((word.upper(), short, m.group(1) is not None))
        pos = m.end()
    return tuple(nodes)


def _matches(words: list[str], pattern: tuple[tuple[str, str, bool], ...]) -> bool:
    if not pattern:
        return not words
    long, short, optional = pattern[0]
    if words and words[0] in (long, short) and _matches(words[1:], pattern[1:]):
        return True
    return optional and _matches(words, pattern[1:])


def parse_bool(arg: str) -> bool:
    a = arg.strip().upper()
    if a in ("ON", "1"):
        return True
    if a in ("OFF", "0"):
        return False
    raise ScpiCommandError(-224, f"expected ON or OFF, got {arg.strip()!r}")


def parse_number(arg: str, low: float, high: float) -> float:
    """A decimal numeric parameter within [low, high] (MINimum / MAXimum accepted)."""
    a = arg.strip().upper()
    if a in ("MIN", "MINIMUM"):
        return low
    if a in ("MAX", "MAXIMUM"):
        return high
    try:
        value = float(a)
    except ValueError:
        raise ScpiCommandError(-104, f"not a number: {arg.strip()!r}") from None
    if not np.isfinite(value) or not low <= value <= high:
        raise ScpiCommandError(-222, f"{value:g} outside {low:g} .. {high:g}")
    return value


Handler = Callable[[str | None], "str | bytes | None"]


@dataclass(frozen=True)
class _Command:
    pattern: tuple[tuple[str, str, bool], ...]
    query: bool
    handler: Handler
    takes_argument: bool


def _split_message_units(message: str) -> list[str]:
    """Split a program message into its message units (IEEE 488.2) at ``;`` outside quoted strings."""
    parts, cur, quote = [], [], None
    for ch in message:
        if quote:
            cur.append(ch)
            if ch == quote:
                quote = None
        elif ch in "\"'":
            quote = ch
            cur.append(ch)
        elif ch == ";":
            parts.append("".join(cur))
            cur = []
        else:
            cur.append(ch)
    parts.append("".join(cur))
    return [p.strip() for p in parts if p.strip()]
