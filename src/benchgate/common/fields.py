"""Reading typed fields out of a positioned YAML tree, collecting every error with its place.

Generic over the kind of file: a :class:`Collector` makes its errors with the ``item`` class of
the :class:`~benchgate.errors.FileErrors` it is given (plan, station …). Engineering numbers with
units are read one layer up (:class:`benchgate.plan.fields.PlanCollector`), where the units
parser lives.
"""

from __future__ import annotations

import difflib
import re
from collections.abc import Iterable
from typing import Any

from benchgate.common.yamlpos import YNode
from benchgate.errors import FileError, FileErrors

ID_RE = re.compile(r"^[A-Za-z0-9][A-Za-z0-9_.-]{0,63}$")

_TYPE_NAMES = {dict: "a mapping", list: "a list", str: "text", int: "a whole number",
               float: "a number", bool: "true or false", type(None): "nothing (null)"}


def type_name(value: Any) -> str:
    return _TYPE_NAMES.get(type(value), type(value).__name__)


def described(value: Any) -> str:
    """``a whole number (3)``; containers and null without a repr."""
    if isinstance(value, (dict, list)) or value is None:
        return type_name(value)
    text = repr(value)
    return f"{type_name(value)} ({text if len(text) <= 60 else text[:57] + '...'})"


class Collector:
    """Errors and notes found while reading one file of the kind ``kind`` (its FileErrors class)."""

    def __init__(self, file: str, kind: type[FileErrors] = FileErrors):
        self.file = file
        self.kind = kind
        self.errors: list[FileError] = []
        self.notes: list[str] = []

    def error(self, where: YNode | tuple[int, int] | None, message: str) -> None:
        line, col = _pos(where)
        self.errors.append(self.kind.item(message, self.file, line, col))

    def raise_errors(self) -> None:
        """Raise every error found so far as one ``kind`` (nothing when there is none)."""
        if self.errors:
            raise self.kind(self.errors)

    def note(self, where: YNode | tuple[int, int] | None, message: str) -> None:
        line, col = _pos(where)
        self.notes.append(f"{self.file}:{line}:{col}: note: {message}")

    # ---------------------------------------------------------------- structure

    def mapping(self, node: YNode | None, path: str, allowed: Iterable[str],
                required: Iterable[str] = ()) -> dict[str, YNode] | None:
        """The node as a mapping; unknown keys get a "did you mean", missing required keys an error."""
        if node is None:
            return None
        if not node.is_map:
            self.error(node, f"{path}: expected a mapping (key: value lines), got {type_name(node.value)}")
            return None
        allowed = list(allowed)
        for key in node.value:
            if key not in allowed:
                hint = difflib.get_close_matches(key, allowed, n=1, cutoff=0.6)
                more = f"; did you mean {hint[0]!r}?" if hint else f"; expected one of: {', '.join(allowed)}"
                self.error(node.key_pos[key], f"{path}: unknown key {key!r}{more}")
        for key in required:
            if key not in node.value:
                self.error(node, f"{path}: missing required key {key!r}")
        return node.value

    def key_pos(self, parent: YNode, key: str) -> tuple[int, int]:
        return parent.key_pos.get(key, (parent.line, parent.column))

    # ---------------------------------------------------------------- scalars

    def text(self, node: YNode | None, path: str, *, allow_numbers: bool = False) -> str | None:
        if node is None:
            return None
        v = node.value
        if isinstance(v, str):
            if not v.strip():
                self.error(node, f"{path}: must not be empty")
                return None
            return v
        if allow_numbers and isinstance(v, (int, float)) and not isinstance(v, bool):
            return str(v)
        self.error(node, f"{path}: expected text, got {described(v)}")
        return None

    def ident(self, node: YNode | None, path: str) -> str | None:
        s = self.text(node, path, allow_numbers=True)
        if s is not None and not ID_RE.match(s):
            self.error(node, f"{path}: {s!r} is not a valid id (letters, digits, '-', '_', '.'; "
                             "starting with a letter or digit; at most 64 characters)")
            return None
        return s

    def boolean(self, node: YNode | None, path: str) -> bool | None:
        if node is None:
            return None
        if isinstance(node.value, bool):
            return node.value
        self.error(node, f"{path}: expected true or false (on/off, yes/no), got {described(node.value)}")
        return None

    def integer(self, node: YNode | None, path: str, lo: int | None = None, hi: int | None = None) -> int | None:
        if node is None:
            return None
        v = node.value
        if isinstance(v, bool) or not isinstance(v, int):
            self.error(node, f"{path}: expected a whole number, got {described(v)}")
            return None
        if (lo is not None and v < lo) or (hi is not None and v > hi):
            self.error(node, f"{path}: {v} is outside {lo} … {hi}")
            return None
        return v

    def choice(self, node: YNode | None, path: str, choices: Iterable[str]) -> str | None:
        if node is None:
            return None
        choices = list(choices)
        v = node.value
        if isinstance(v, bool) and set(choices) >= {"yes", "no"}:
            return "yes" if v else "no"
        if not isinstance(v, str):
            self.error(node, f"{path}: expected one of {', '.join(choices)}, got {described(v)}")
            return None
        if v not in choices:
            hint = difflib.get_close_matches(v, choices, n=1, cutoff=0.6)
            more = f"; did you mean {hint[0]!r}?" if hint else ""
            self.error(node, f"{path}: unknown value {v!r}; expected one of {', '.join(choices)}{more}")
            return None
        return v

    def str_list(self, node: YNode | None, path: str) -> list[tuple[str, YNode]]:
        if node is None:
            return []
        if not node.is_list:
            self.error(node, f"{path}: expected a list (lines starting with '- '), got {type_name(node.value)}")
            return []
        out = []
        for i, item in enumerate(node.value):
            s = self.text(item, f"{path}[{i}]")
            if s is not None:
                out.append((s, item))
        return out


def _pos(where: YNode | tuple[int, int] | None) -> tuple[int | None, int | None]:
    if where is None:
        return 1, 1
    if isinstance(where, YNode):
        return where.line, where.column
    return where
