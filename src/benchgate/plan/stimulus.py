"""Step kinds that drive the unit's input with the signal generator and measure its response.

- ``tone``: one sine at ``frequency``; checks on the two-channel response (gain, gain_db, phase,
  input/output amplitude, output THD) and any single-capture measurement of the output.
- ``sweep``: a stepped sweep over ``frequencies`` (listed) or ``start``/``stop`` with
  ``points_per_decade``; an optional response ``mask`` (upper and lower limit lines, dB, straight
  on a log-frequency axis) judged at every point, and checks over the sweep (−3 dB frequencies,
  pass-band gain, ripple).
- ``level_sweep``: one frequency at rising ``levels``; checks ``thd_at_level`` (at
  ``output_level``) and ``clip_level`` (where the THD reaches ``thd_limit``).

The dataclasses are registered in :data:`benchgate.plan.model.STEP_CLASSES`; the loader reads
their list-valued fields with :func:`parse_extras`.
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from benchgate.common.names import MEASUREMENT_UNITS, RESPONSE_UNITS, SWEEP_UNITS
from benchgate.common.yamlpos import YNode
from benchgate.errors import QuantityError
from benchgate.plan.fields import PlanCollector
from benchgate.plan.limits import Window
from benchgate.plan.model import _COMMON, STEP_CLASSES, Check, Step, spec
from benchgate.units.parse import parse_quantity

STIMULUS_KINDS = ("tone", "sweep", "level_sweep")
LEVEL_UNITS = ("Vpp", "Vrms", "Vpk")
#: what each kind's checks may name -> unit
TONE_CHECKS: dict[str, str] = {**RESPONSE_UNITS, **MEASUREMENT_UNITS}
SWEEP_CHECKS: dict[str, str] = {k: SWEEP_UNITS[k] for k in ("f_3db_low", "f_3db_high", "passband_gain_db",
                                                              "ripple")}
LEVEL_CHECKS: dict[str, str] = {k: SWEEP_UNITS[k] for k in ("thd_at_level", "clip_level")}
CHECK_UNITS = {"tone": TONE_CHECKS, "sweep": SWEEP_CHECKS, "level_sweep": LEVEL_CHECKS}
MAX_POINTS = 200  # sweep points or levels in one step
MAX_FREQUENCY = 1e7


@dataclass(frozen=True)
class MaskPoint:
    """One corner of the response mask: limits in dB at ``frequency`` (Hz); None: no limit."""

    frequency: float
    low: float | None = None
    high: float | None = None


@dataclass(frozen=True)
class Mask:
    """Upper and lower limit lines over frequency, each straight between its corners on a log f axis."""

    points: tuple[MaskPoint, ...]

    def _line(self, f: float, side: str) -> float | None:
        pts = [(p.frequency, getattr(p, side)) for p in self.points if getattr(p, side) is not None]
        if not pts or f < pts[0][0] or f > pts[-1][0]:
            return None  # outside the line's span: no limit there
        for (f0, v0), (f1, v1) in zip(pts, pts[1:], strict=False):
            if f0 <= f <= f1:
                if f1 == f0:
                    return v0
                t = (math.log10(f) - math.log10(f0)) / (math.log10(f1) - math.log10(f0))
                return v0 + t * (v1 - v0)
        return pts[-1][1] if f == pts[-1][0] else None

    def window_at(self, f: float, decision: str | None = None) -> Window | None:
        """The window (dB) the gain at ``f`` must lie in, or None where the mask sets no limit."""
        low, high = self._line(f, "low"), self._line(f, "high")
        if low is None and high is None:
            return None
        return Window(unit="dB", low=low, high=high, derived_from=f"response mask at {f:g} Hz",
                      decision=decision)


_STIM = {
    "instrument": spec("recorder taking both channels at the same instants", kind="choice",
                       choices=("digitizer", "adc")),
    "input_channel": spec("recorder channel wired to the unit's input (the reference)"),
    "output_channel": spec("recorder channel wired to the unit's output"),
    "level": spec("generator amplitude: volts with Vpp, Vrms or Vpk ('200 mVpp'), or plain volts in "
                  "level_unit", kind="level", unit="V", minimum=0, maximum=100),
    "level_unit": spec("what level means: peak-to-peak, rms or peak volts", kind="choice", choices=LEVEL_UNITS),
    "offset": spec("generator DC offset", kind="quantity", unit="V", minimum=-50, maximum=50),
    "settle": spec("time after each setting before recording (the response settles)", kind="quantity",
                   unit="s", minimum=0, maximum=600),
    "rate": spec("sample rate; absent: the recorder's default", kind="quantity", unit="Hz", minimum=0,
                 maximum=1e10),
    "duration": spec("record length at each point (stretched to `cycles` periods)", kind="quantity",
                     unit="s", minimum=0, maximum=600),
    "cycles": spec("fewest stimulus periods in each record", kind="int", minimum=3, maximum=100000),
}


@dataclass(frozen=True, kw_only=True)
class StimulusStep(Step):
    """Fields of every step that drives the unit with the generator."""

    instrument: str = field(default="digitizer", metadata=_STIM["instrument"])
    input_channel: str = field(default="in", metadata=_STIM["input_channel"])
    output_channel: str = field(default="out", metadata=_STIM["output_channel"])
    level: float | None = field(default=None, metadata=_STIM["level"])
    level_unit: str = field(default="Vpp", metadata=_STIM["level_unit"])
    offset: float = field(default=0.0, metadata=_STIM["offset"])
    settle: float = field(default=0.1, metadata=_STIM["settle"])
    rate: float | None = field(default=None, metadata=_STIM["rate"])
    duration: float = field(default=0.05, metadata=_STIM["duration"])
    cycles: int = field(default=10, metadata=_STIM["cycles"])

    def record_length(self, frequency: float) -> float:
        """Seconds recorded at ``frequency``: the duration, stretched to ``cycles`` periods."""
        return max(self.duration, self.cycles / frequency)


@dataclass(frozen=True, kw_only=True)
class ToneStep(StimulusStep):
    """Drive one sine into the unit and judge its response (two channels: input and output)."""

    kind: str = field(default="tone", metadata=_COMMON["kind"])
    frequency: float = field(default=0.0, metadata=spec("stimulus frequency", kind="quantity", unit="Hz",
                                                        minimum=0, maximum=MAX_FREQUENCY, required=True))
    harmonics: int = field(default=10, metadata=spec(
        "harmonics fitted for output_thd and summed for thd", kind="int", minimum=1, maximum=50))
    checks: tuple[Check, ...] = field(default=(), metadata=spec(
        "measurement name -> limit (response measurements, or any measurement of the output)",
        kind="checks", choices=tuple(TONE_CHECKS)))


@dataclass(frozen=True, kw_only=True)
class SweepStep(StimulusStep):
    """A stepped frequency sweep at one level: gain and phase at every point, a response mask,
    and checks over the sweep."""

    kind: str = field(default="sweep", metadata=_COMMON["kind"])
    frequencies: tuple[float, ...] = field(default=(), metadata=spec(
        "the sweep's frequencies (or give start, stop and points_per_decade)", kind="quantities", unit="Hz"))
    start: float | None = field(default=None, metadata=spec(
        "lowest frequency (with stop and points_per_decade)", kind="quantity", unit="Hz", minimum=0,
        maximum=MAX_FREQUENCY))
    stop: float | None = field(default=None, metadata=spec(
        "highest frequency", kind="quantity", unit="Hz", minimum=0, maximum=MAX_FREQUENCY))
    points_per_decade: int | None = field(default=None, metadata=spec(
        "points per decade, log-spaced from start to stop", kind="int", minimum=1, maximum=100))
    reference_frequency: float | None = field(default=None, metadata=spec(
        "where the pass-band gain is taken (one of the points); absent: the largest gain",
        kind="quantity", unit="Hz", minimum=0, maximum=MAX_FREQUENCY))
    passband: tuple[float, float] | None = field(default=None, metadata=spec(
        "[low, high] frequencies over which ripple is measured", kind="band", unit="Hz"))
    mask: Mask | None = field(default=None, metadata=spec(
        "response mask: a list of {frequency, min, max} corners (dB), straight lines on a log axis",
        kind="mask"))
    checks: tuple[Check, ...] = field(default=(), metadata=spec(
        "measurement over the sweep -> limit", kind="checks", choices=tuple(SWEEP_CHECKS)))


@dataclass(frozen=True, kw_only=True)
class LevelSweepStep(StimulusStep):
    """One frequency at rising levels: output against input, THD at a stated output level and
    the clipping point."""

    kind: str = field(default="level_sweep", metadata=_COMMON["kind"])
    frequency: float = field(default=0.0, metadata=spec("stimulus frequency", kind="quantity", unit="Hz",
                                                        minimum=0, maximum=MAX_FREQUENCY, required=True))
    levels: tuple[float, ...] = field(default=(), metadata=spec(
        "generator amplitudes in rising order ('100 mVpp', …)", kind="levels", unit="V", required=True))
    output_level: float | None = field(default=None, metadata=spec(
        "output amplitude (V peak) at which thd_at_level is stated", kind="quantity", unit="V",
        minimum=0, maximum=1000))
    thd_limit: float | None = field(default=None, metadata=spec(
        "output THD that marks the clipping point for clip_level", kind="quantity", unit="%",
        minimum=0, maximum=100))
    checks: tuple[Check, ...] = field(default=(), metadata=spec(
        "measurement over the levels -> limit", kind="checks", choices=tuple(LEVEL_CHECKS)))


STEP_CLASSES.update({"tone": ToneStep, "sweep": SweepStep, "level_sweep": LevelSweepStep})


def sweep_frequencies(step: SweepStep) -> tuple[float, ...]:
    """The sweep's points: as listed, or log-spaced from start to stop (both included)."""
    if step.frequencies:
        return step.frequencies
    if step.start and step.stop and step.points_per_decade:
        decades = math.log10(step.stop / step.start)
        n = max(2, int(round(decades * step.points_per_decade)) + 1)
        return tuple(float(f) for f in np.logspace(math.log10(step.start), math.log10(step.stop), n))
    return ()


# ----------------------------------------------------------------------------- loading
def _quantities(c: PlanCollector, node: YNode, path: str, unit: str, hi: float) -> tuple[float, ...] | None:
    if not node.is_list or not node.value:
        c.error(node, f"{path}: expected a list of values in {unit}")
        return None
    if len(node.value) > MAX_POINTS:
        c.error(node, f"{path}: {len(node.value)} values; at most {MAX_POINTS}")
        return None
    out = []
    for i, item in enumerate(node.value):
        v = c.quantity(item, f"{path}[{i}]", unit, 0.0, hi)
        if v is not None:
            if not v > 0:
                c.error(item, f"{path}[{i}]: must be greater than zero")
            out.append(v)
    if len(out) == len(node.value) and any(b <= a for a, b in zip(out, out[1:], strict=False)):
        c.error(node, f"{path}: values must rise from one to the next")
        return None
    return tuple(out) if len(out) == len(node.value) else None


def _mask(c: PlanCollector, node: YNode, path: str) -> Mask | None:
    if not node.is_list or len(node.value) < 2:
        c.error(node, f"{path}: expected a list of at least two {{frequency, min, max}} corners")
        return None
    pts = []
    for i, item in enumerate(node.value):
        m = c.mapping(item, f"{path}[{i}]", ("frequency", "min", "max"), required=["frequency"])
        if m is None:
            continue
        f = c.quantity(m.get("frequency"), f"{path}[{i}].frequency", "Hz", 0.0, MAX_FREQUENCY)
        lo = c.quantity(m["min"], f"{path}[{i}].min", "dB", -400.0, 400.0) if "min" in m else None
        hi = c.quantity(m["max"], f"{path}[{i}].max", "dB", -400.0, 400.0) if "max" in m else None
        if "min" not in m and "max" not in m:
            c.error(item, f"{path}[{i}]: a mask corner needs min, max or both")
        elif lo is not None and hi is not None and lo >= hi:
            c.error(item, f"{path}[{i}]: min must be below max")
        if f is not None:
            if not f > 0:
                c.error(m["frequency"], f"{path}[{i}].frequency: must be greater than zero")
            pts.append(MaskPoint(f, lo, hi))
    if len(pts) == len(node.value) and any(b.frequency <= a.frequency for a, b in zip(pts, pts[1:], strict=False)):
        c.error(node, f"{path}: corner frequencies must rise from one to the next")
        return None
    return Mask(tuple(pts)) if len(pts) == len(node.value) else None


_LEVEL_RE = re.compile(r"^(.*?)(Vpp|Vrms|Vpk)\s*$")


def _level(c: PlanCollector, node: YNode, path: str) -> tuple[float | None, str | None]:
    """A generator level: ('200 mVpp' → 0.2, 'Vpp'); plain volts give no unit of their own."""
    text = node.plain()
    found = _LEVEL_RE.match(text) if isinstance(text, str) else None
    try:
        if found:
            value = parse_quantity(found.group(1).strip() + "V", "V").value
            unit = found.group(2)
        else:
            value, unit = parse_quantity(text, "V").value, None
    except QuantityError as exc:
        c.error(node, f"{path}: {exc}")
        return None, None
    if not (math.isfinite(value) and 0 < value <= 100):
        c.error(node, f"{path}: a level must be above 0 and at most 100 V, got {value:g} V")
        return None, None
    return value, unit


def parse_extras(c: PlanCollector, kind: str, m: dict[str, YNode], node: YNode, path: str,
                 values: dict[str, Any]) -> None:
    """The list-valued fields of the stimulus kinds and their cross-field rules."""
    units: set[str] = set()
    if "level" in m:
        v, unit = _level(c, m["level"], f"{path}.level")
        if v is not None:
            values["level"] = v
            units |= {unit} if unit else set()
    if "levels" in m:
        node_l = m["levels"]
        if not node_l.is_list or not node_l.value or len(node_l.value) > MAX_POINTS:
            c.error(node_l, f"{path}.levels: expected a list of 1 to {MAX_POINTS} levels")
        else:
            got = [_level(c, item, f"{path}.levels[{i}]") for i, item in enumerate(node_l.value)]
            if all(v is not None for v, _u in got):
                levels = tuple(float(v) for v, _u in got)  # type: ignore[arg-type]
                if any(b <= a for a, b in zip(levels, levels[1:], strict=False)):
                    c.error(node_l, f"{path}.levels: levels must rise from one to the next")
                else:
                    values["levels"] = levels
                units |= {u for _v, u in got if u}
    if len(units) > 1:
        c.error(node, f"{path}: levels written in {' and '.join(sorted(units))}; use one kind")
    elif units:
        if "level_unit" in m and values.get("level_unit") not in units:
            c.error(m["level_unit"], f"{path}.level_unit: the levels are written in {units.pop()}")
        else:
            values["level_unit"] = units.pop()
    if "frequencies" in m:
        v = _quantities(c, m["frequencies"], f"{path}.frequencies", "Hz", MAX_FREQUENCY)
        if v is not None:
            values["frequencies"] = v
    if "passband" in m:
        band = _quantities(c, m["passband"], f"{path}.passband", "Hz", MAX_FREQUENCY)
        if band is not None:
            if len(band) != 2:
                c.error(m["passband"], f"{path}.passband: give [low, high]")
            else:
                values["passband"] = band
    if "mask" in m:
        mask = _mask(c, m["mask"], f"{path}.mask")
        if mask is not None:
            values["mask"] = mask
    if kind in ("tone", "sweep") and "level" not in m:
        c.error(node, f"{path}: missing required key 'level' (the generator amplitude)")
    if kind == "sweep":
        listed = "frequencies" in m
        ranged = [k for k in ("start", "stop", "points_per_decade") if k in m]
        if listed == bool(ranged):
            c.error(node, f"{path}: give frequencies, or start, stop and points_per_decade (not both)")
        elif ranged and len(ranged) != 3:
            c.error(node, f"{path}: start, stop and points_per_decade go together")
        elif ranged and values.get("start") and values.get("stop") and values["stop"] <= values["start"]:
            c.error(m["stop"], f"{path}.stop: must be above start")
    if kind == "level_sweep":
        names = {ch for ch in (m.get("checks").value if m.get("checks") is not None and m["checks"].is_map else {})}
        if "thd_at_level" in names and "output_level" not in m:
            c.error(node, f"{path}: the thd_at_level check needs output_level")
        if "clip_level" in names and "thd_limit" not in m:
            c.error(node, f"{path}: the clip_level check needs thd_limit")
