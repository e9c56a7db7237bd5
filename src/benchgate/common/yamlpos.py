"""A safe YAML reader that keeps the line and column of every node.

Only plain data comes out (mappings with string keys, lists, strings, numbers, booleans, null):
no object is ever constructed from a tag, nothing is evaluated. Duplicate keys, tabs in
indentation, unknown tags, runaway alias expansion and non-finite numbers (``.nan``, ``.inf``)
are errors with their position.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any

from benchgate.errors import FileError, FileErrors

_MAX_NODES = 50_000  # a large plan has a few thousand values; the limit keeps every load fast
_MAX_DEPTH = 64
_MAX_BYTES = 4_000_000

_T = "tag:yaml.org,2002:"
_SCALAR_TAGS = {_T + n for n in ("str", "int", "float", "bool", "null", "timestamp")}


@dataclass
class YNode:
    """A value read from YAML with where it starts (line and column from 1)."""

    value: Any  # dict[str, YNode] | list[YNode] | str | int | float | bool | None
    line: int
    column: int
    # for mappings: key -> (line, column) of the key itself
    key_pos: dict[str, tuple[int, int]] = field(default_factory=dict)

    @property
    def is_map(self) -> bool:
        return isinstance(self.value, dict)

    @property
    def is_list(self) -> bool:
        return isinstance(self.value, list)

    def plain(self) -> Any:
        """The value as plain Python data (for hashing and schema validation)."""
        if isinstance(self.value, dict):
            return {k: v.plain() for k, v in self.value.items()}
        if isinstance(self.value, list):
            return [v.plain() for v in self.value]
        return self.value


def load_text(text: str, file: str, kind: type[FileErrors] = FileErrors) -> YNode:
    """Parse one YAML document into :class:`YNode` values.

    Raises ``kind`` (PlanErrors, StationErrors …: the caller says what the file is) with the
    position of every problem.
    """
    import yaml

    err = kind.item
    errors: list[FileError] = []
    _check_tabs(text, file, errors, err)
    if errors:
        raise kind(errors)
    if not text.strip() or all(
        not ln.strip() or ln.lstrip().startswith("#") for ln in text.splitlines()
    ):
        raise kind([err("the file is empty (no YAML content)", file, 1, 1)])
    _prescan(text, file, kind)
    try:
        node = yaml.compose(text, Loader=yaml.SafeLoader)
    except yaml.MarkedYAMLError as exc:
        mark = exc.problem_mark or exc.context_mark
        problem = exc.problem or exc.context or "invalid YAML"
        line, col = (mark.line + 1, mark.column + 1) if mark else (1, 1)
        raise kind([err(f"YAML syntax error: {problem}", file, line, col)]) from None
    except yaml.YAMLError as exc:  # reader errors: characters YAML does not allow
        pos = getattr(exc, "position", None)
        line, col = _line_col(text, pos) if isinstance(pos, int) else (1, 1)
        ch = getattr(exc, "character", None)
        what = f"character {ch!r} (U+{ord(ch):04X})" if isinstance(ch, str) and ch else "a character"
        raise kind([err(f"{what} is not allowed in YAML", file, line, col)]) from None
    except RecursionError:
        raise kind([err("YAML nested too deeply", file, 1, 1)]) from None
    if node is None:
        raise kind([err("the file is empty (no YAML content)", file, 1, 1)])
    conv = _Converter(file, err)
    result = conv.convert(node, 0, set())
    if conv.errors:
        raise kind(conv.errors)
    return result


def _prescan(text: str, file: str, kind: type[FileErrors]) -> None:
    """Refuse a document with more than _MAX_NODES nodes before composing it.

    Composing is the slow part of reading (pure Python, about 20 µs a node); counting parser
    events with libyaml when it is there stops early and costs little. Syntax errors are left
    to the composer, which reports them with their position.
    """
    import yaml

    loader = getattr(yaml, "CSafeLoader", yaml.SafeLoader)
    kinds = (yaml.ScalarEvent, yaml.SequenceStartEvent, yaml.MappingStartEvent, yaml.AliasEvent)
    count = 0
    try:
        for event in yaml.parse(text, Loader=loader):
            if isinstance(event, kinds):
                count += 1
                if count > _MAX_NODES:
                    m = event.start_mark
                    line, col = (m.line + 1, m.column + 1) if m else (1, 1)
                    raise kind([kind.item(f"more than {_MAX_NODES} YAML values; a plan or "
                                          "station file is far smaller", file, line, col)])
    except yaml.YAMLError:
        return


def load_file(path: str, kind: type[FileErrors] = FileErrors) -> tuple[YNode, str]:
    """Read and parse ``path``; returns the tree and the text. Raises ``kind`` with positions."""
    err = kind.item
    try:
        with open(path, "rb") as fh:
            raw = fh.read(_MAX_BYTES + 1)
    except FileNotFoundError:
        raise kind([err("no such file", path)]) from None
    except IsADirectoryError:
        raise kind([err("is a directory, not a YAML file", path)]) from None
    except OSError as exc:
        raise kind([err(f"cannot read: {exc.strerror or exc}", path)]) from None
    if len(raw) > _MAX_BYTES:
        raise kind([err(f"file larger than {_MAX_BYTES} bytes; not a plan or station file", path, 1, 1)])
    if raw.startswith(b"\xef\xbb\xbf"):
        raw = raw[3:]
    try:
        text = raw.decode("utf-8")
    except UnicodeDecodeError as exc:
        good = raw[: exc.start].decode("utf-8", errors="replace")
        line, col = _line_col(good + "?", len(good))
        raise kind([err(
            f"not UTF-8 text (byte 0x{raw[exc.start]:02X}); expected a UTF-8 YAML file",
            path, line, col)]) from None
    nul = text.find("\x00")
    if nul >= 0:
        line, col = _line_col(text, nul)
        raise kind([err("binary data (NUL byte); expected a UTF-8 YAML file", path, line, col)])
    return load_text(text, path, kind), text


def _line_col(text: str, pos: int) -> tuple[int, int]:
    before = text[:pos]
    line = before.count("\n") + 1
    col = pos - (before.rfind("\n") + 1) + 1
    return line, col


def _check_tabs(text: str, file: str, errors: list[FileError], err: type[FileError]) -> None:
    for i, ln in enumerate(text.splitlines(), start=1):
        indent = len(ln) - len(ln.lstrip(" \t"))
        j = ln.find("\t", 0, indent)
        if j >= 0:
            errors.append(err("tab character in indentation; YAML indents with spaces", file, i, j + 1))
            if len(errors) >= 20:
                return


class _Converter:
    def __init__(self, file: str, err: type[FileError]):
        self.file = file
        self.item = err
        self.errors: list[FileError] = []
        self.count = 0
        import yaml

        self._yaml = yaml
        self._ctor = yaml.constructor.SafeConstructor()

    def _err(self, msg: str, node) -> None:
        m = node.start_mark
        self.errors.append(self.item(msg, self.file, m.line + 1, m.column + 1))

    def convert(self, node, depth: int, active: set[int]) -> YNode:
        yaml = self._yaml
        m = node.start_mark
        pos = (m.line + 1, m.column + 1)
        self.count += 1
        if self.count > _MAX_NODES:
            if self.count == _MAX_NODES + 1:
                self._err("too many YAML nodes (alias expansion?); a plan or station file is small", node)
            return YNode(None, *pos)
        if depth > _MAX_DEPTH or id(node) in active:
            self._err("YAML nested too deeply or refers to itself", node)
            return YNode(None, *pos)
        if isinstance(node, yaml.ScalarNode):
            return YNode(self._scalar(node), *pos)
        active = active | {id(node)}
        if isinstance(node, yaml.SequenceNode):
            if node.tag != _T + "seq":
                self._err(f"unsupported YAML tag {node.tag!r}", node)
            return YNode([self.convert(v, depth + 1, active) for v in node.value], *pos)
        if isinstance(node, yaml.MappingNode):
            if node.tag != _T + "map":
                self._err(f"unsupported YAML tag {node.tag!r}", node)
            out: dict[str, YNode] = {}
            key_pos: dict[str, tuple[int, int]] = {}
            for knode, vnode in node.value:
                km = knode.start_mark
                if not isinstance(knode, yaml.ScalarNode) or knode.tag == _T + "merge":
                    self._err("keys must be plain names (no merge keys, lists or mappings as keys)", knode)
                    continue
                key = self._scalar(knode)
                if not isinstance(key, str):
                    key = str(key).lower() if isinstance(key, bool) else str(key)
                if key in out:
                    first = key_pos[key]
                    self._err(f"duplicate key {key!r} (first given at line {first[0]}, column {first[1]})", knode)
                    continue
                key_pos[key] = (km.line + 1, km.column + 1)
                out[key] = self.convert(vnode, depth + 1, active)
            return YNode(out, *pos, key_pos=key_pos)
        self._err("unsupported YAML node", node)
        return YNode(None, *pos)

    def _scalar(self, node) -> Any:
        tag = node.tag
        if tag not in _SCALAR_TAGS:
            self._err(f"unsupported YAML tag {tag!r}; plan and station files hold plain values only", node)
            return None
        try:
            if tag == _T + "int":
                return self._ctor.construct_yaml_int(node)
            if tag == _T + "float":
                value = self._ctor.construct_yaml_float(node)
                if not math.isfinite(value):
                    # .nan, .inf and 1e999 (which overflows): no field of a plan or a station
                    # takes them; an open side of a window is written by leaving the limit out
                    self._err(f"{node.value!r} is not a finite number", node)
                    return None
                return value
            if tag == _T + "bool":
                return self._ctor.construct_yaml_bool(node)
            if tag == _T + "null":
                return None
        except (ValueError, self._yaml.YAMLError):
            self._err(f"cannot read {node.value!r} as {tag.rsplit(':', 1)[-1]}", node)
            return None
        return str(node.value)  # str and timestamps stay text
