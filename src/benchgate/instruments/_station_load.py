"""Reading a station YAML file into :class:`~benchgate.instruments.station.Station`.

Every problem is collected with its file:line:column and raised together as PlanErrors.
"""

from __future__ import annotations

import datetime as dt
from typing import Any

from benchgate.errors import PlanError, PlanErrors
from benchgate.instruments.registry import KIND_ROLES
from benchgate.instruments.station import ROLES, Calibration, InstrumentConfig, Station
from benchgate.plan.yamlpos import YNode, load_file
from benchgate.units import UnitError, parse_quantity
from benchgate.units.parse import NotFiniteError

_TOP_KEYS = {"station", "description", "instruments"}
_ADDRESS_KEYS = ("port", "url", "usb", "resource")
_MAX_TIMEOUT = 3600.0  # s; longer is a typo, and would overflow some OS timeouts
_CAL_KEYS = {"date", "due", "gain", "offset"}
# ADC keys with their reader; anything else in an ADC entry is an error (a typo must not pass)
_ADC_DEFAULTS: dict[str, Any] = {
    "baudrate": 115200, "protocol": "framed", "channels": ("ch0",), "bits": 12, "vref": 3.3,
    "clock_ppm": None, "dtr_low": False, "rts_low": None, "identify_timeout": 2.0,
    "max_loss": 0.0, "rate": None, "timestamps": False, "exclusive": True, "handshake": True,
}


class StationReader:
    def __init__(self, path: str, registry: Any = None):
        self.path = path
        self.registry = registry  # where each driver's own option spec comes from
        self.errors: list[PlanError] = []

    def err(self, message: str, node: YNode | None = None, pos: tuple[int, int] | None = None) -> None:
        line, col = pos if pos else ((node.line, node.column) if node is not None else (None, None))
        self.errors.append(PlanError(message, self.path, line, col))

    def read(self) -> Station:
        root, _text = load_file(self.path)
        if not root.is_map:
            raise PlanErrors([PlanError("a station file is a mapping with 'station' and 'instruments'",
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
        if self.errors:
            raise PlanErrors(self.errors)
        return Station(id=str(sid.value).strip(), path=self.path, instruments=instruments)

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
        if kind == "serial-adc":
            options = self.adc_options(entry)
            calibration = self.calibration(cal_node, channels=options["channels"])
        else:
            options = self.driver_options(role, kind, entry, node)
            calibration = self.calibration(cal_node, channels=None)
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

    def adc_options(self, entry: dict[str, YNode]) -> dict[str, Any]:
        opts = dict(_ADC_DEFAULTS)
        for key, v in entry.items():
            if key not in _ADC_DEFAULTS:
                self.err(f"unknown key {key!r} for a serial-adc "
                         f"(expected: {', '.join(sorted([*_ADC_DEFAULTS, 'timeout', 'calibration']))})", v)
                continue
            if key in ("baudrate", "bits"):
                lo, hi = (50, 10_000_000) if key == "baudrate" else (1, 16)
                if isinstance(v.value, bool) or not isinstance(v.value, int) or not lo <= v.value <= hi:
                    self.err(f"'{key}' must be a whole number from {lo} to {hi}, got {v.value!r}", v)
                else:
                    opts[key] = v.value
            elif key == "protocol":
                if v.value not in ("framed", "lines"):
                    self.err(f"'protocol' must be 'framed' or 'lines', got {v.value!r}", v)
                else:
                    opts[key] = v.value
            elif key == "channels":
                names = [c.value for c in v.value] if v.is_list else None
                if not names or not all(isinstance(c, str) and c for c in names) or len(set(names)) != len(names):
                    self.err("'channels' must be a list of distinct channel names, e.g. [out, rail]", v)
                elif len(names) > 8:
                    self.err(f"at most 8 channels (the frame's channel mask is 8 bits), got {len(names)}", v)
                else:
                    opts[key] = tuple(names)
            elif key in ("dtr_low", "rts_low", "timestamps", "exclusive", "handshake"):
                if not isinstance(v.value, bool):
                    self.err(f"'{key}' must be true or false, got {v.value!r}", v)
                else:
                    opts[key] = v.value
            elif key == "vref":
                opts[key] = self.quantity(v, "V", 3.3, positive=True, hi=1000.0)
            elif key == "identify_timeout":
                opts[key] = self.quantity(v, "s", 2.0, positive=True, hi=_MAX_TIMEOUT)
            elif key == "rate":
                opts[key] = self.quantity(v, "Hz", None, positive=True, hi=1e10)
            elif key == "clock_ppm":
                ppm = self.quantity(v, None, None, hi=1e6)
                if ppm is not None and ppm < 0:
                    self.err("'clock_ppm' must be >= 0", v)
                opts[key] = ppm
            elif key == "max_loss":
                loss = self.fraction(v)
                if loss is not None and not 0 <= loss < 1:
                    self.err(f"'max_loss' must be a fraction from 0 to below 1, got {v.value!r}", v)
                opts[key] = loss if loss is not None else 0.0
        if opts["rts_low"] is None:
            opts["rts_low"] = opts["dtr_low"]
        if not opts["handshake"]:
            where = entry["handshake"]
            if opts["protocol"] != "lines":
                self.err("'handshake: false' (a device without commands) needs 'protocol: lines'", where)
            elif opts["rate"] is None:
                self.err("a device without commands needs its sample 'rate' in the station", where)
            elif len(opts["channels"]) != 1:
                self.err("a device without commands streams one channel: give exactly one in 'channels'", where)
        return opts

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
        except UnitError as exc:
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
        except UnitError as exc:
            self.err(str(exc), node)
            return None
        if q.unit not in ("", "%"):
            self.err(f"expected a fraction or a percentage, got {node.value!r}", node)
            return None
        return q.value / 100.0 if q.unit == "%" else q.value

    def driver_options(self, role: str, kind: str | None, entry: dict[str, YNode], node: YNode) -> dict[str, Any]:
        """The entry's other keys, units parsed, checked by the driver's own option spec."""
        options = {k: self.generic(k, v) for k, v in entry.items()}
        if kind is None:
            return options
        from benchgate.errors import InstrumentError
        from benchgate.instruments.registry import Registry

        try:
            driver = (self.registry or Registry()).driver(kind, role)
        except InstrumentError as exc:
            self.err(exc.message, node)
            return options
        n_before = len(self.errors)
        for key, spec in driver.station_options().items():
            if spec.kind == "quantity" and key in entry and isinstance(entry[key].value, str):
                options[key] = self.quantity(entry[key], spec.unit, options[key])  # its unit checked
        if len(self.errors) > n_before:
            return options
        for path, message in driver.check_options(options):
            self.err(f"{role}: {message}", pos=_position(node, path))
        return options

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
            except UnitError:
                return node.value
            if q.unit == "%":
                return q.value / 100.0
            return q.value if q.unit else node.value
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
