"""Reading a station YAML file into :class:`~benchgate.instruments.station.Station`.

Every problem is collected with its file:line:column and raised together as StationErrors.
"""

from __future__ import annotations

import datetime as dt
import re
from pathlib import Path
from typing import Any
from urllib.parse import urlsplit

from benchgate.common.fields import Collector
from benchgate.common.yamlpos import YNode, load_file
from benchgate.errors import NotFiniteError, QuantityError, StationError, StationErrors
from benchgate.instruments.options import OptionSpec, check_value
from benchgate.instruments.registry import KIND_ROLES
from benchgate.instruments.station import ROLES, Calibration, InstrumentConfig, Station
from benchgate.units import parse_quantity

_TOP_KEYS = {"station", "description", "instruments", "results"}
_ADDRESS_KEYS = ("port", "url", "usb", "resource")
_MAX_TIMEOUT = 3600.0  # s; longer is a typo, and would overflow some OS timeouts
_CAL_KEYS = {"date", "due", "gain", "offset"}
_BAD = object()  # an option value that was refused (the error is already recorded)
_DB_SCHEMES = ("postgresql", "postgres")  # the URLs a results database may be (store/backend.py)
_SCHEME_RE = re.compile(r"^([a-zA-Z][a-zA-Z0-9+.-]*)://")


class StationReader(Collector):
    """Reads one station file, collecting every error (a StationError) with its place."""

    def __init__(self, path: str, registry: Any = None):
        super().__init__(path, StationErrors)
        self.path = path
        self.registry = registry  # where each driver's own option spec comes from

    def err(self, message: str, node: YNode | None = None, pos: tuple[int, int] | None = None) -> None:
        self.error(pos if pos else node, message)

    def read(self) -> Station:
        root, _text = load_file(self.path, StationErrors)
        if not root.is_map:
            raise StationErrors([StationError("a station file is a mapping with 'station' and 'instruments'",
                                        self.path, root.line, root.column)])
        top = root.value
        for key in top:
            if key not in _TOP_KEYS:
                self.err(f"unknown key {key!r} (expected: {', '.join(sorted(_TOP_KEYS))})",
                         pos=root.key_pos[key])
        sid = top.get("station")
        if sid is None:
            self.err("missing 'station' (the station's id)", root)
        elif not isinstance(sid.value, str) or not sid.value.strip():
            self.err("'station' must be a non-empty name", sid)
        instruments: dict[str, InstrumentConfig] = {}
        inst = top.get("instruments")
        if inst is None:
            self.err("missing 'instruments' (a mapping of role -> instrument)", root)
        elif not inst.is_map:
            self.err("'instruments' must be a mapping of role -> instrument", inst)
        else:
            for role, node in inst.value.items():
                cfg = self.instrument(role, node, inst.key_pos[role])
                if cfg is not None:
                    instruments[role] = cfg
        results = self.results(top.get("results"))
        self.raise_errors()
        return Station(id=str(sid.value).strip(), path=self.path, instruments=instruments,
                       results=results)

    def results(self, node: YNode | None) -> str | None:
        """The station's results database: a SQLite file (relative to the station file's
        folder) or a ``postgresql://`` URL. A URL is never echoed in a message (it may hold a
        password); only its scheme or the faulty part is named."""
        if node is None:
            return None
        if not isinstance(node.value, str) or not node.value.strip():
            self.err("'results' must be a file path (SQLite) or a postgresql:// URL", node)
            return None
        text = node.value.strip()
        scheme = _SCHEME_RE.match(text)
        if scheme is None:
            return str(Path(self.path).parent / Path(text).expanduser())
        if scheme.group(1).lower() not in _DB_SCHEMES:
            self.err(f"'results': a {scheme.group(1)}:// URL is not a results database "
                     "(a file path for SQLite, or a postgresql:// URL)", node)
            return None
        try:
            parts = urlsplit(text)
            parts.port  # noqa: B018 - raises ValueError for a port that is not a number
        except ValueError:
            self.err("'results': the postgresql:// URL cannot be read (its port must be a "
                     "number from 1 to 65535; write special characters of the user or password "
                     "with %-escapes)", node)
            return None
        if parts.fragment:
            self.err("'results': a postgresql:// URL has no '#' part (write '#' in a password "
                     "as %23)", node)
            return None
        return text

    # ------------------------------------------------------------------ instruments
    def instrument(self, role: str, node: YNode, key_pos: tuple[int, int]) -> InstrumentConfig | None:
        n_before = len(self.errors)
        if role not in ROLES:
            self.err(f"unknown instrument role {role!r} (expected one of: {', '.join(ROLES)})", pos=key_pos)
            return None
        if not node.is_map:
            self.err(f"instrument {role!r} must be a mapping with at least 'kind'", node)
            return None
        entry = dict(node.value)
        kind_node = entry.pop("kind", None)
        kind = None
        if kind_node is None:
            self.err(f"instrument {role!r} has no 'kind'", node)
        elif kind_node.value not in KIND_ROLES:
            self.err(f"unknown kind {kind_node.value!r} (known: {', '.join(sorted(KIND_ROLES))})", kind_node)
        elif KIND_ROLES[kind_node.value] != role:
            self.err(f"kind {kind_node.value!r} cannot serve as {role!r} "
                     f"(it is a {KIND_ROLES[kind_node.value]})", kind_node)
        else:
            kind = kind_node.value
        address = self.address(role, kind, entry, node)
        timeout = self.quantity(entry.pop("timeout", None), "s", 1.0, positive=True, hi=_MAX_TIMEOUT)
        cal_node = entry.pop("calibration", None)
        options = self.driver_options(kind, entry, node)
        # an ADC is calibrated per channel (or as a whole); other instruments as a whole
        channels = options.get("channels") if kind == "serial-adc" else None
        calibration = self.calibration(cal_node, channels=channels)
        if len(self.errors) > n_before or kind is None or address is None:
            return None
        return InstrumentConfig(role=role, kind=kind, address=address, timeout=timeout, options=options,
                                calibration=calibration, file=self.path, line=node.line)

    def address(self, role: str, kind: str | None, entry: dict[str, YNode], node: YNode) -> str | None:
        given = [k for k in _ADDRESS_KEYS if k in entry]
        allowed = ("resource",) if kind and kind.startswith("scpi-") else ("port", "url", "usb")
        if len(given) != 1:
            what = "none" if not given else " and ".join(given)
            self.err(f"instrument {role!r} needs exactly one address ({' / '.join(allowed)}), got {what}", node)
            for k in given:
                entry.pop(k)
            return None
        key = given[0]
        value = entry.pop(key)
        if kind and key not in allowed:
            self.err(f"a {kind} is addressed by {' / '.join(allowed)}, not {key!r}", value)
            return None
        if key == "usb":
            return self.usb(value)
        if not isinstance(value.value, str) or not value.value.strip():
            self.err(f"'{key}' must be a non-empty text", value)
            return None
        return value.value.strip()

    def usb(self, node: YNode) -> str | None:
        if not node.is_map:
            self.err("'usb' must be a mapping {vid: 0x2341, pid: 0x0043, serial: ...}", node)
            return None
        parts = []
        for key in ("vid", "pid"):
            v = node.value.get(key)
            num = None
            if v is None:
                self.err(f"'usb' needs '{key}' (a 16-bit USB id, e.g. 0x2341)", node)
            elif isinstance(v.value, int) and not isinstance(v.value, bool):
                num = v.value
            elif isinstance(v.value, str):
                try:
                    num = int(v.value, 16)
                except ValueError:
                    pass
            if v is not None and (num is None or not 0 <= num <= 0xFFFF):
                self.err(f"'{key}' must be a 16-bit USB id like 0x2341, got {v.value!r}", v)
                num = None
            parts.append(num)
        for key in node.value:
            if key not in ("vid", "pid", "serial"):
                self.err(f"unknown key {key!r} in 'usb' (expected vid, pid, serial)", pos=node.key_pos[key])
        if None in parts:
            return None
        addr = f"usb:{parts[0]:04x}:{parts[1]:04x}"
        serial = node.value.get("serial")
        if serial is not None:
            addr += f":{serial.value}"
        return addr

    def calibration(self, node: YNode | None, *, channels: tuple[str, ...] | None) -> Calibration | None:
        if node is None:
            return None
        if not node.is_map:
            self.err("'calibration' must be a mapping (date, due, gain, offset, or per channel)", node)
            return None
        keys = set(node.value)
        if channels is not None and keys and not keys <= _CAL_KEYS:
            per: dict[str, Calibration] = {}
            for ch, sub in node.value.items():
                if ch not in channels:
                    self.err(f"calibration for unknown channel {ch!r} (channels: {', '.join(channels)})",
                             pos=node.key_pos[ch])
                    continue
                c = self.calibration(sub, channels=None)
                if c is not None:
                    per[ch] = c
            return Calibration(channels=per)
        fields: dict[str, Any] = {}
        for key, v in node.value.items():
            if key not in _CAL_KEYS:
                self.err(f"unknown calibration key {key!r} (expected: date, due, gain, offset)",
                         pos=node.key_pos[key])
            elif key in ("date", "due"):
                fields[key] = self.date(v)
            elif key == "gain":
                g = self.quantity(v, None, 1.0, hi=1e6)
                if not g > 0:
                    self.err(f"calibration gain must be > 0, got {v.value!r}", v)
                fields[key] = g
            else:
                fields[key] = self.quantity(v, "V", 0.0, lo=-1000.0, hi=1000.0)
        if fields.get("date") and fields.get("due") and fields["due"] < fields["date"]:
            self.err("calibration due date is before its date", node.value["due"])
        return Calibration(**fields)

    # ------------------------------------------------------------------ values
    def date(self, node: YNode) -> dt.date | None:
        try:
            return dt.date.fromisoformat(str(node.value))
        except ValueError:
            self.err(f"expected a date like 2026-06-01, got {node.value!r}", node)
            return None

    def quantity(self, node: YNode | None, unit: str | None, default, *, positive: bool = False,
                 lo: float | None = None, hi: float | None = None):
        """A finite number (parse_quantity refuses NaN and infinity) inside its plausible range."""
        if node is None:
            return default
        try:
            q = parse_quantity(node.value, unit)
        except QuantityError as exc:
            self.err(str(exc), node)
            return default
        if positive and not q.value > 0:
            self.err(f"must be greater than zero, got {node.value!r}", node)
            return default
        if (lo is not None and q.value < lo) or (hi is not None and q.value > hi):
            span = f"{lo:g} … {hi:g}" if lo is not None and hi is not None else (
                f"at least {lo:g}" if lo is not None else f"at most {hi:g}")
            symbol = q.unit or unit or ""
            self.err(f"{node.value!r} is out of range ({span}{' ' + symbol if symbol else ''})", node)
            return default
        return q.value

    def fraction(self, node: YNode) -> float | None:
        try:
            q = parse_quantity(node.value)
        except QuantityError as exc:
            self.err(str(exc), node)
            return None
        if q.unit not in ("", "%"):
            self.err(f"expected a fraction or a percentage, got {node.value!r}", node)
            return None
        return q.value / 100.0 if q.unit == "%" else q.value

    def driver_options(self, kind: str | None, entry: dict[str, YNode], node: YNode) -> dict[str, Any]:
        """The entry's other keys, read and checked by the driver's own option spec.

        The driver (from the registry) declares each key's kind; the value is read by it (a
        quantity with its unit, a fraction, a choice …), then the driver checks what depends
        on several keys and fills in its defaults. Unknown keys are errors at their value.
        """
        if kind is None:
            return {}
        from benchgate.errors import InstrumentError
        from benchgate.instruments.registry import Registry

        try:
            driver = (self.registry or Registry()).driver(kind)
        except InstrumentError as exc:
            self.err(exc.message, node)
            return {}
        specs = driver.station_options()
        n_before = len(self.errors)
        options: dict[str, Any] = {}
        for key, v in entry.items():
            spec = specs.get(key)
            if spec is None:
                expected = ", ".join(sorted([*specs, "timeout", "calibration"]))
                self.err(f"unknown key {key!r} for a {kind} (expected: {expected})", v)
                continue
            value = self.option_value(key, spec, v)
            if value is not _BAD:
                options[key] = value
        if len(self.errors) == n_before:
            for path, message in driver.check_options(options):
                self.err(message, pos=_position(node, path))
        return driver.complete_options(options)

    def option_value(self, key: str, spec: OptionSpec, node: YNode) -> Any:
        """One option's value read as its spec says; _BAD (error recorded) when refused."""
        if spec.kind in ("quantity", "number"):
            if isinstance(node.value, bool):
                self.err(f"'{key}' must be a number, got {node.value!r}", node)
                return _BAD
            unit = spec.unit if spec.kind == "quantity" else None
            return self.quantity(node, unit, _BAD, positive=spec.positive, lo=spec.minimum, hi=spec.maximum)
        value: Any
        if spec.kind == "fraction":
            value = self.fraction(node)
            if value is None:
                return _BAD
        elif spec.kind == "names":
            value = tuple(c.value for c in node.value) if node.is_list else node.value
        elif spec.kind in ("mapping", "list_or_mapping"):
            value = self.generic(key, node)
        else:
            value = node.value
        problem = check_value(key, spec, value)
        if problem:
            shown = node.value if spec.kind == "fraction" else value
            self.err(problem.replace(f"got {value!r}", f"got {shown!r}"), node)
            return _BAD
        return value

    def generic(self, key: str, node: YNode) -> Any:
        """SCPI entries: quantities with units become SI numbers (``%`` a fraction); text stays text."""
        if key == "commands":
            if not node.is_map or not all(isinstance(v.value, str) for v in node.value.values()):
                self.err("'commands' must map command names to template text", node)
                return {}
            return {k: v.value for k, v in node.value.items()}
        if node.is_map:
            return {k: self.generic(k, v) for k, v in node.value.items()}
        if node.is_list:
            return [self.generic(key, v) for v in node.value]
        if isinstance(node.value, str):
            try:
                q = parse_quantity(node.value)
            except NotFiniteError as exc:  # "nan", "inf V", "1e999": never a setting
                self.err(f"{key}: {exc}", node)
                return None
            except QuantityError:
                return node.value
            if q.unit == "%":
                return q.value / 100.0
            return q.value if q.unit else node.value
        if isinstance(node.value, int) and not isinstance(node.value, bool):
            try:
                parse_quantity(node.value)  # a whole number beyond any float is no setting
            except NotFiniteError as exc:
                self.err(f"{key}: {exc}", node)
                return None
        return node.value


def _position(entry: YNode, path: tuple[str, ...]) -> tuple[int, int]:
    """Line and column of the key at ``path`` inside ``entry`` (as deep as the file goes)."""
    node, pos = entry, (entry.line, entry.column)
    for key in path:
        if not node.is_map or key not in node.value:
            break
        pos = node.key_pos[key]
        node = node.value[key]
    return pos
