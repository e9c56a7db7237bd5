"""Reading one check's limit: min/max, nominal with tolerance, or a window derived from the circuit."""

from __future__ import annotations

import dataclasses
from typing import Any

from benchgate.common.bounds import bounds_of
from benchgate.common.yamlpos import YNode
from benchgate.errors import QuantityError
from benchgate.plan import derive
from benchgate.plan.fields import PlanCollector
from benchgate.plan.limits import Window
from benchgate.plan.model import DECISIONS
from benchgate.units.eseries import is_preferred, nearest_preferred, series_for_tolerance
from benchgate.units.format import format_quantity, window_text
from benchgate.units.tolerance import Part, Tolerance, parse_part, parse_tolerance

LIMIT_KEYS = ("min", "max", "nominal", "tolerance", "from_circuit", "margin", "decision", "max_risk")
#: the largest acceptable specific risk of the ``risk`` rule, in %: above 0, below 50
#: (50 % is what simple acceptance already gives at the limit, ILAC-G8:09/2019 4.2.1)
MAX_RISK_RANGE = (1e-9, 49.9)
MC_KEYS = ("draws", "seed", "distribution")
#: plausible part values; outside them a value is a typo, and the numbers would overflow
PART_RANGES = {"Ω": (1e-3, 1e12), "F": (1e-15, 10.0), "H": (1e-12, 1e3)}
SERIES_ORDER = ("E6", "E12", "E24", "E48", "E96")
_CACHE: dict[Any, derive.Derivation] = {}
_CACHE_MAX = 256


def parse_limit(c: PlanCollector, node: YNode, path: str, measurement: str, unit: str,
                mc_defaults: dict[str, Any], budget: derive.WorkBudget | None = None) -> Window | None:
    """The window of one check, or None after recording errors.

    Every window that comes out is a proper finite interval that some possible value of the
    quantity can fall in (see :mod:`benchgate.common.bounds`).
    """
    try:
        w = _parse_window(c, node, path, measurement, unit, mc_defaults,
                          budget if budget is not None else derive.WorkBudget())
    except ValueError as exc:  # a Window refusing its limits (e.g. overflow in a derivation)
        c.error(node, f"{path}: {exc}")
        return None
    if w is None:
        return None
    if node.is_map and "max_risk" in node.value:
        mr = parse_max_risk(c, node.value["max_risk"], f"{path}.max_risk")
        if mr is None:
            return None
        w = dataclasses.replace(w, max_risk=mr)
    return _passable(c, node, path, measurement, w)


def parse_max_risk(c: PlanCollector, node: YNode, path: str) -> float | None:
    """A largest acceptable specific risk written in % ("1 %", 0.5), as a fraction."""
    v = c.quantity(node, path, "%", *MAX_RISK_RANGE)
    return None if v is None else v / 100.0


def _passable(c: PlanCollector, node: YNode, path: str, measurement: str, w: Window) -> Window | None:
    """``w`` when some value can pass it; an error at the limit otherwise."""
    text = window_text(w.low, w.high, w.unit)
    if w.low is not None and w.high is not None and w.low == w.high:
        c.error(node, f"{path}: the window {text} has zero width; no measured value, which "
                      "carries an uncertainty, can be shown to lie in it")
        return None
    b = bounds_of(measurement)
    if not b.admits(w.low, w.high):
        c.error(node, f"{path}: no {measurement} can ever pass the window {text}: "
                      f"{measurement} is {b.describe(w.unit)} ({b.why})")
        return None
    return w



def _parse_window(c: PlanCollector, node: YNode, path: str, measurement: str, unit: str,
                  mc_defaults: dict[str, Any], budget: derive.WorkBudget) -> Window | None:
    m = c.mapping(node, path, LIMIT_KEYS)
    if m is None:
        return None
    n_err = len(c.errors)
    lo = c.quantity(m.get("min"), f"{path}.min", unit)
    hi = c.quantity(m.get("max"), f"{path}.max", unit)
    nominal = c.quantity(m.get("nominal"), f"{path}.nominal", unit)
    decision = c.choice(m.get("decision"), f"{path}.decision", DECISIONS)
    tol = None
    if "tolerance" in m:
        tol = _tolerance(c, m["tolerance"], f"{path}.tolerance", unit)
        if "nominal" not in m:
            c.error(m["tolerance"], f"{path}: a tolerance needs a nominal value")
        if "min" in m or "max" in m:
            c.error(m["tolerance"], f"{path}: give either min/max or nominal with tolerance, not both")
    if "margin" in m and "from_circuit" not in m:
        c.error(c.key_pos(node, "margin"), f"{path}: margin widens a from_circuit window; there is none here")
    has_given = any(k in m for k in ("min", "max", "tolerance"))
    if "nominal" in m and not has_given and "from_circuit" not in m:
        c.error(m["nominal"], f"{path}: a nominal alone is not a window; add a tolerance or min/max")
    if not has_given and "from_circuit" not in m and "nominal" not in m:
        c.error(node, f"{path}: a limit needs min and/or max, nominal with tolerance, or from_circuit")
    if len(c.errors) > n_err:
        return None
    given: Window | None = None
    if tol is not None and nominal is not None:
        if tol.relative and nominal == 0:
            c.error(m["tolerance"], f"{path}: a tolerance in % of a zero nominal is an empty window; "
                                    "give it in the unit or use min/max")
            return None
        lo, hi = tol.bounds(nominal)
        given = Window(unit=unit, low=lo, high=hi, nominal=nominal,
                       derived_from=f"nominal {format_quantity(nominal, unit)} {tol}", decision=decision)
    elif lo is not None or hi is not None:
        if lo is not None and hi is not None and lo > hi:
            c.error(m["min"], f"{path}: min {m['min'].value!r} is above max {m['max'].value!r}")
            return None
        if nominal is not None and ((lo is not None and nominal < lo) or (hi is not None and nominal > hi)):
            c.error(m["nominal"], f"{path}: nominal {m['nominal'].value!r} lies outside its own window")
            return None
        given = Window(unit=unit, low=lo, high=hi, nominal=nominal, derived_from="given", decision=decision)
    if "from_circuit" not in m:
        return given
    fc = m["from_circuit"]
    circuit, mc = parse_circuit(c, fc, f"{path}.from_circuit", measurement, mc_defaults)
    margin = None
    if "margin" in m:
        margin = _tolerance(c, m["margin"], f"{path}.margin", unit)
    if circuit is None or (len(c.errors) > n_err):
        return None
    key = _key(circuit, measurement, unit, mc, given)
    cost = derive.work(circuit, mc["draws"])
    if not budget.charge(key, cost):
        c.error(fc, f"{path}.from_circuit: this derivation ({cost:,} circuit evaluations) would take "
                    f"the plan past its budget of {budget.limit:,}; use fewer Monte Carlo draws or fewer "
                    "toleranced parts, or share one from_circuit between checks with a YAML anchor")
        return None
    try:
        d = _analyze(circuit, measurement, unit, mc, given)
    except ValueError as exc:
        c.error(fc, f"{path}.from_circuit: {exc}")
        return None
    w = derive.derived_window(circuit, d, margin=margin, given=given, decision=decision)
    if given is not None and given.nominal is not None and not given.contains(d.nominal):
        c.error(fc, f"{path}: the design nominal {format_quantity(d.nominal, unit)} lies outside the given window")
        return None
    return w


def _tolerance(c: PlanCollector, node: YNode, path: str, unit: str) -> Tolerance | None:
    try:
        return parse_tolerance(node.plain(), unit, field=path)
    except QuantityError as exc:
        c.error(node, str(exc))
        return None


def _key(circuit: derive.Circuit, measurement: str, unit: str, mc: dict[str, Any],
         given: Window | None) -> tuple:
    win = None if given is None else (given.low, given.high)
    return (circuit.topology, tuple(sorted(circuit.options.items())), tuple(sorted(circuit.parts.items())),
            measurement, unit, mc["draws"], mc["seed"], mc["distribution"], win)


def _analyze(circuit: derive.Circuit, measurement: str, unit: str, mc: dict[str, Any],
             given: Window | None) -> derive.Derivation:
    win = None if given is None else (given.low, given.high)
    key = _key(circuit, measurement, unit, mc, given)
    if key not in _CACHE:
        if len(_CACHE) >= _CACHE_MAX:
            _CACHE.clear()
        _CACHE[key] = derive.analyze(circuit, measurement, draws=mc["draws"], seed=mc["seed"],
                                     distribution=mc["distribution"], window=win, unit=unit)
    return _CACHE[key]


def parse_monte_carlo(c: PlanCollector, node: YNode | None, path: str, base: dict[str, Any]) -> dict[str, Any]:
    out = dict(base)
    m = c.mapping(node, path, MC_KEYS)
    if not m:
        return out
    draws = c.integer(m.get("draws"), f"{path}.draws", derive.MIN_DRAWS, derive.MAX_DRAWS)
    seed = c.integer(m.get("seed"), f"{path}.seed", 0, 2**63 - 1)
    dist = c.choice(m.get("distribution"), f"{path}.distribution", derive.DISTRIBUTIONS)
    for k, v in (("draws", draws), ("seed", seed), ("distribution", dist)):
        if v is not None:
            out[k] = v
    return out


def parse_circuit(c: PlanCollector, node: YNode, path: str, measurement: str,
                  mc_defaults: dict[str, Any]) -> tuple[derive.Circuit | None, dict[str, Any]]:
    mc = dict(mc_defaults)
    if not node.is_map:
        c.error(node, f"{path}: expected a mapping with a topology and its parts")
        return None, mc
    topo_node = node.value.get("topology")
    if topo_node is None:
        c.error(node, f"{path}: missing required key 'topology' ({', '.join(derive.TOPOLOGIES)})")
        return None, mc
    topology = c.choice(topo_node, f"{path}.topology", derive.TOPOLOGIES)
    if topology is None:
        return None, mc
    info = derive.TOPOLOGIES[topology]
    allowed = ["topology", "monte_carlo", *info["options"], *info["parts"]]
    m = c.mapping(node, path, allowed)
    if m is None:
        return None, mc
    n_err = len(c.errors)
    if measurement not in info["outputs"]:
        c.error(topo_node, f"{path}: {topology} gives {', '.join(info['outputs'])}, not {measurement}")
    mc = parse_monte_carlo(c, m.get("monte_carlo"), f"{path}.monte_carlo", mc_defaults)
    options: dict[str, Any] = {}
    parts: dict[str, Part] = {}
    if topology == "rc_ladder":
        form = c.choice(m.get("form"), f"{path}.form", ("highpass", "lowpass"))
        if "form" not in m:
            c.error(node, f"{path}: missing required key 'form' (highpass: series C, shunt R; lowpass: series R, shunt C)")
        n = c.integer(m.get("sections"), f"{path}.sections", 3, 8)
        options = {"form": form, "sections": 3 if "sections" not in m else n}
        for key in ("R", "C"):
            if key not in m:
                c.error(node, f"{path}: missing required key {key!r}")
                continue
            _ladder_parts(c, m[key], f"{path}.{key}", key, options["sections"] or 3, parts)
        for key in ("source", "load"):
            if key in m:
                p = _part(c, m[key], f"{path}.{key}", "Ω", note=False)
                if p is not None:
                    parts[key] = p
    else:
        required = info["required"]
        optional: tuple[str, ...] = ()
        if topology == "lc_tank":
            kind = c.choice(m.get("type"), f"{path}.type", ("colpitts", "hartley"))
            if "type" not in m:
                c.error(node, f"{path}: missing required key 'type' (colpitts or hartley)")
            options = {"type": kind}
            if kind is None:
                return None, mc
            required, optional = derive.LC_PARTS[kind]
            for key in m:
                if key in info["parts"] and key not in required + optional:
                    c.error(c.key_pos(node, key), f"{path}: {key!r} is not a part of a {kind} tank "
                                                  f"(parts: {', '.join(required + optional)})")
        else:
            for opt, allowed_values in info["options"].items():  # gain stages and filters
                if opt not in m:
                    c.error(node, f"{path}: missing required key {opt!r} ({', '.join(allowed_values)})")
                options[opt] = c.choice(m.get(opt), f"{path}.{opt}", allowed_values)
        for key in required:
            if key not in m:
                c.error(node, f"{path}: missing required part {key!r}")
        for key in (*required, *optional):
            if key in m:
                p = _part(c, m[key], f"{path}.{key}", info["parts"][key])
                if p is not None:
                    parts[key] = p
    if len(c.errors) > n_err:
        return None, mc
    return derive.Circuit(topology, options, parts), mc


def _ladder_parts(c: PlanCollector, node: YNode, path: str, key: str, n: int, parts: dict[str, Part]) -> None:
    unit = "Ω" if key == "R" else "F"
    if node.is_list:
        if len(node.value) != n:
            c.error(node, f"{path}: {len(node.value)} values for {n} sections; give one per section or one shared value")
            return
        for i, item in enumerate(node.value):
            p = _part(c, item, f"{path}[{i}]", unit)
            if p is not None:
                parts[f"{key}{i + 1}"] = p
        return
    p = _part(c, node, path, unit)
    if p is not None:
        for i in range(n):  # one value, N independent physical parts
            parts[f"{key}{i + 1}"] = p


def _part(c: PlanCollector, node: YNode, path: str, unit: str, *, note: bool = True) -> Part | None:
    try:
        p = parse_part(node.plain(), unit, field=path)
    except QuantityError as exc:
        c.error(node, str(exc))
        return None
    lo_ok, hi_ok = PART_RANGES[unit]
    if not lo_ok <= p.nominal <= hi_ok:
        c.error(node, f"{path}: {format_quantity(p.nominal, unit)} is outside the range of real parts "
                      f"({format_quantity(lo_ok, unit)} … {format_quantity(hi_ok, unit)})")
        return None
    t = p.tolerance
    if note and t.relative and t.minus == t.plus and t.plus > 0:
        name = series_for_tolerance(t.plus * 100)
        # fine if in the series for its tolerance or any coarser one (parts are sold that way)
        coarser = SERIES_ORDER[: SERIES_ORDER.index(name) + 1]
        if not any(is_preferred(p.nominal, s) for s in coarser):
            near = nearest_preferred(p.nominal, name)
            c.note(node, f"{path}: {format_quantity(p.nominal, unit)} is not an {name} value "
                         f"(IEC 60063, for {t}); nearest preferred {format_quantity(near, unit)}")
    return p
