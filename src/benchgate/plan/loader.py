"""Loading a plan: YAML with positions -> validated :class:`Plan`, every error at once.

A plan that loads is a plan that can run: besides types and units, the loader checks that each
capture is long enough and fast enough for its checks, that every step's instrument is in
``requires``, and that a start-up capture has the supply output off before it.
"""

from __future__ import annotations

import dataclasses
import math
from typing import Any

from benchgate.common.fields import described
from benchgate.common.names import CAPABILITIES, MEASUREMENT_UNITS, READING_SOURCES, READING_UNITS
from benchgate.common.yamlpos import YNode, load_file, load_text
from benchgate.errors import PlanErrors
from benchgate.plan import derive, stimulus
from benchgate.plan.checks import parse_limit, parse_max_risk, parse_monte_carlo
from benchgate.plan.fields import PlanCollector
from benchgate.plan.hashing import content_hash
from benchgate.plan.model import (
    ADAPTIVE_KEYS,
    ADAPTIVE_MEASUREMENTS,
    ADAPTIVE_RULES,
    CAPTURE_DEFAULT_KEYS,
    DECISIONS,
    DEFAULTS_SPEC,
    HAZARD_NAMES,
    MAX_LOOKS,
    MAX_SAMPLES,
    MAX_STEPS,
    STEP_CLASSES,
    STEP_KINDS,
    Adaptive,
    CaptureStep,
    Check,
    Hazard,
    Plan,
    ReadingStep,
    Step,
    SupplyStep,
)
from benchgate.plan.validate import validate_steps

MC_DEFAULTS = {"draws": derive.DEFAULT_DRAWS, "seed": 1, "distribution": "uniform"}


def _yaml_keys(cls) -> dict[str, dataclasses.Field]:
    return {(f.metadata.get("key") or f.name): f for f in dataclasses.fields(cls)
            if f.metadata.get("yaml", True)}


def load_plan(path: str) -> Plan:
    """Read and validate the plan file ``path``.

    Raises
    ------
    PlanErrors
        Every problem found, each with file, line and column.
    """
    root, _ = load_file(str(path), PlanErrors)
    return build_plan(root, str(path))


def loads_plan(text: str, file: str = "<plan>") -> Plan:
    """Like :func:`load_plan` for text already in memory."""
    return build_plan(load_text(text, file, PlanErrors), file)


def build_plan(root: YNode, file: str) -> Plan:
    c = PlanCollector(file)
    keys = _yaml_keys(Plan)
    m = c.mapping(root, "plan file", [*keys, "defaults"], required=[k for k, f in keys.items()
                                                                     if f.metadata["required"]])
    if m is None:
        raise PlanErrors(c.errors)
    plan_id = c.ident(m.get("plan"), "plan")
    version = c.text(m.get("version"), "version", allow_numbers=True)
    product = c.text(m.get("product"), "product")
    description = c.text(m.get("description"), "description") or ""
    cautions = tuple(s for s, _ in c.str_list(m.get("cautions"), "cautions"))
    hazards = _hazards(c, m.get("hazards"))
    requires: set[str] = set()
    if "requires" in m:
        node = m["requires"]
        if not node.is_list:
            c.error(node, f"requires: expected a list such as [adc, supply], got {described(node.value)}")
        else:
            for i, item in enumerate(node.value):
                v = c.choice(item, f"requires[{i}]", CAPABILITIES)
                if v is not None:
                    requires.add(v)
    decision = c.choice(m.get("decision"), "decision", DECISIONS) or "simple"
    max_risk = parse_max_risk(c, m["max_risk"], "max_risk") if "max_risk" in m else None
    defaults = _defaults(c, m.get("defaults"))
    steps: list[Step] = []
    steps_node = m.get("steps")
    if steps_node is not None:
        if not steps_node.is_list or not steps_node.value:
            c.error(steps_node, "steps: expected a non-empty list of steps")
        else:
            positions: list[dict[str, tuple[int, int]]] = []
            budget = derive.WorkBudget()
            if len(steps_node.value) > MAX_STEPS:
                c.error(steps_node.value[MAX_STEPS], f"steps: more than {MAX_STEPS} steps; split the "
                                                     "plan (a plan runs on one unit in one go)")
                raise PlanErrors(c.errors)
            for i, item in enumerate(steps_node.value):
                got = _step(c, item, f"steps[{i}]", defaults, budget)
                if got is not None:
                    steps.append(got[0])
                    positions.append(got[1])
            validate_steps(c, steps, positions, requires, complete=len(steps) == len(steps_node.value))
            _risk_rule_limits(c, steps, decision, max_risk, m)
            _adaptive_checks(c, steps, positions, decision)
    if c.errors:
        raise PlanErrors(c.errors)
    return Plan(id=plan_id, version=version, product=product, description=description.strip(),
                cautions=cautions, hazards=hazards, requires=frozenset(requires), decision=decision,
                max_risk=max_risk, steps=tuple(steps), hash=content_hash(root.plain()), path=file, notes=tuple(c.notes))


def _risk_rule_limits(c: PlanCollector, steps: list[Step], decision: str, max_risk: float | None,
                      m: dict[str, YNode]) -> None:
    """Every check judged by the ``risk`` rule needs a largest acceptable risk (its own or the
    plan's); a max_risk where no check is judged by the risk rule is an error too (it would look
    like it protects something)."""
    uses = False
    for s in steps:
        for ch in s.checks:
            rule = ch.window.decision or decision
            if rule == "risk":
                uses = True
                if ch.window.max_risk is None and max_risk is None:
                    c.error((ch.line, ch.column) if ch.line else m.get("decision"),
                            f"{s.id}.{ch.measurement}: the risk rule needs max_risk (here in the limit, "
                            "or for the whole plan), e.g. max_risk: 1 %")
            elif ch.window.max_risk is not None:
                c.error((ch.line, ch.column) if ch.line else None,
                        f"{s.id}.{ch.measurement}: max_risk applies to the risk rule only; this check "
                        f"is judged by {rule!r} (set decision: risk)")
    if max_risk is not None and not uses:
        c.error(m["max_risk"], "max_risk: no check is judged by the risk rule (set decision: risk)")


def _adaptive_checks(c: PlanCollector, steps: list[Step], positions: list[dict[str, tuple[int, int]]],
                     decision: str) -> None:
    """An adaptive capture stops on decided checks, so each of its checks must be decidable
    before the whole capture is in, under a rule that states a risk."""
    for s, pos in zip(steps, positions, strict=False):
        if not isinstance(s, CaptureStep) or s.adaptive is None:
            continue
        where = pos.get("adaptive", pos[""])
        if s.power_on:
            c.error(where, f"step {s.id!r}: a power_on capture takes in the start-up and needs its "
                           "whole capture; it cannot be adaptive")
        if not s.checks:
            c.error(where, f"step {s.id!r}: an adaptive capture needs checks to decide")
        for ch in s.checks:
            at = (ch.line, ch.column) if ch.line else where
            if ch.measurement not in ADAPTIVE_MEASUREMENTS:
                c.error(at, f"step {s.id!r}: {ch.measurement} needs the whole capture and cannot be "
                            "judged early; move it to a capture that is not adaptive (early: "
                            f"{', '.join(ADAPTIVE_MEASUREMENTS)})")
            rule = ch.window.decision or decision
            if rule not in ADAPTIVE_RULES:
                c.error(at, f"step {s.id!r}: {ch.measurement} is judged by {rule!r}, which states "
                            "no risk to stop on; an adaptive capture needs decision guarded or risk")


def _hazards(c: PlanCollector, node: YNode | None) -> tuple[Hazard, ...]:
    if node is None:
        return ()
    if not node.is_list:
        c.error(node, f"hazards: expected a list of {{name, text}} entries, got {described(node.value)}")
        return ()
    out = []
    for i, item in enumerate(node.value):
        m = c.mapping(item, f"hazards[{i}]", ("name", "text"), required=("name", "text"))
        if m is None:
            continue
        name = c.choice(m.get("name"), f"hazards[{i}].name", HAZARD_NAMES)
        text = c.text(m.get("text"), f"hazards[{i}].text")
        if name and text:
            out.append(Hazard(name, text.strip()))
    return tuple(out)


def _defaults(c: PlanCollector, node: YNode | None) -> dict[str, Any]:
    d: dict[str, Any] = {"on_fail": None, "retries": 0, "capture": {}, "monte_carlo": dict(MC_DEFAULTS)}
    m = c.mapping(node, "defaults", DEFAULTS_SPEC)
    if not m:
        return d
    d["on_fail"] = c.choice(m.get("on_fail"), "defaults.on_fail", ("stop", "continue"))
    d["retries"] = c.integer(m.get("retries"), "defaults.retries", 0, 10) or 0
    cap = c.mapping(m.get("capture"), "defaults.capture", CAPTURE_DEFAULT_KEYS)
    if cap:
        fields = _yaml_keys(CaptureStep)
        for key, vnode in cap.items():
            if key in fields:
                v = _field(c, fields[key], vnode, f"defaults.capture.{key}")
                if v is not None:
                    d["capture"][key] = v
    d["monte_carlo"] = parse_monte_carlo(c, m.get("monte_carlo"), "defaults.monte_carlo", MC_DEFAULTS)
    return d


def _field(c: PlanCollector, f: dataclasses.Field, node: YNode, path: str) -> Any:
    md = f.metadata
    kind = md["kind"]
    if kind in ("str",):
        return c.ident(node, path) if f.name == "id" else c.text(node, path)
    if kind == "text":
        v = c.text(node, path)
        return v.strip() if v else v
    if kind == "int":
        return c.integer(node, path, md["minimum"], md["maximum"])
    if kind == "bool":
        return c.boolean(node, path)
    if kind == "choice":
        return c.choice(node, path, md["choices"])
    if kind == "quantity":
        return c.quantity(node, path, md["unit"], md["minimum"], md["maximum"])
    raise AssertionError(f"unhandled field kind {kind}")  # a model/loader mismatch, not user input


def _step(c: PlanCollector, node: YNode, path: str, defaults: dict[str, Any],
          budget: derive.WorkBudget) -> tuple[Step, dict[str, tuple[int, int]]] | None:
    if not node.is_map:
        c.error(node, f"{path}: expected a step (a mapping with id, title, kind …), got {described(node.value)}")
        return None
    kind_node = node.value.get("kind")
    if kind_node is None:
        c.error(node, f"{path}: missing required key 'kind' ({', '.join(STEP_KINDS)})")
        return None
    kind = c.choice(kind_node, f"{path}.kind", STEP_KINDS)
    if kind is None:
        return None
    cls = STEP_CLASSES[kind]
    fields = _yaml_keys(cls)
    extra = ["samples"] if kind == "capture" else []
    required = [k for k, f in fields.items() if f.metadata["required"]]
    if kind == "capture":
        required = [k for k in required if k != "duration"]
    n_err = len(c.errors)
    m = c.mapping(node, path, [*fields, *extra], required=required)
    if m is None:
        return None
    sid = m.get("id").value if m.get("id") is not None and isinstance(m["id"].value, str) else path
    values: dict[str, Any] = {}
    for key, f in fields.items():
        if key not in m or f.metadata["kind"] in ("checks", "limit", "adaptive", "quantities", "band", "mask",
                                                  "level", "levels"):
            continue
        v = _field(c, f, m[key], f"{path}.{key}")
        if v is not None:
            values[f.name] = v
    values["kind"] = kind
    values.setdefault("on_fail", defaults["on_fail"])
    values.setdefault("retries", defaults["retries"])
    if kind == "capture":
        for key, v in defaults["capture"].items():
            values.setdefault(key, v)
        if "adaptive" in m:
            _adaptive(c, m, path, values)
        _capture_extras(c, m, node, path, values)
        checks = _checks(c, m.get("checks"), f"{path}.checks", defaults, budget)
        values["checks"] = tuple(checks)
    elif kind in stimulus.STIMULUS_KINDS:
        stimulus.parse_extras(c, kind, m, node, path, values)
        values["checks"] = tuple(_checks(c, m.get("checks"), f"{path}.checks", defaults, budget,
                                         stimulus.CHECK_UNITS[kind]))
    elif kind == "reading":
        q = values.get("quantity")
        if q is not None:
            sources = READING_SOURCES[q]
            inst = values.setdefault("instrument", sources[0])
            if inst not in sources:
                c.error(m.get("instrument"), f"{path}.instrument: a {inst} cannot read {q} "
                                             f"(use {' or '.join(sources)})")
            if q == "supply_current" and "on_fail" not in m:
                values["on_fail"] = "stop"  # protect the board from a short, whatever the defaults
            lim = m.get("limit")
            if lim is None:
                c.error(node, f"{path}: missing required key 'limit' (the window for the reading)")
            else:
                w = parse_limit(c, lim, f"{path}.limit", q, READING_UNITS[q], defaults["monte_carlo"], budget)
                if w is not None:
                    pos = node.key_pos.get("limit", (lim.line, lim.column))
                    values["checks"] = (Check(q, w, pos[0], pos[1]),)
    elif kind == "prompt":
        if not values.get("ask") and ("expect" in values or "unattended_answer" in values):
            c.error(m.get("expect") or m.get("unattended_answer"),
                    f"{path}: expect and unattended_answer need ask: true")
        if values.get("ask"):
            values.setdefault("expect", "yes")
    elif kind == "supply":
        if not any(k in values for k in ("voltage", "current_limit", "output")) and len(c.errors) == n_err:
            c.error(node, f"{path}: a supply step sets voltage, current_limit and/or output")
    if values["on_fail"] is None:
        values["on_fail"] = "continue"
    if "retry_prompt" in values and not values.get("retries"):
        c.error(m["retry_prompt"], f"{path}: retry_prompt needs retries of at least 1")
    if len(c.errors) > n_err or "id" not in values or "title" not in values:
        return None
    try:
        step = cls(**values)
    except TypeError as exc:  # a missing required value already reported above
        c.error(node, f"{path} ({sid}): {exc}")
        return None
    return step, {k: c.key_pos(node, k) for k in node.value} | {"": (node.line, node.column)}


def _adaptive(c: PlanCollector, m: dict[str, YNode], path: str, values: dict[str, Any]) -> None:
    """Read ``adaptive: {shortest, longest, block}``; the longest capture becomes the duration."""
    node = m["adaptive"]
    a = c.mapping(node, f"{path}.adaptive", ADAPTIVE_KEYS, required=("shortest", "longest"))
    if a is None:
        return
    got = {k: c.quantity(a.get(k), f"{path}.adaptive.{k}", "s", 0, 600, positive=True)
           for k in ADAPTIVE_KEYS}
    if got["shortest"] is None or got["longest"] is None or ("block" in a and got["block"] is None):
        return
    if "duration" in m or "samples" in m:
        c.error(m.get("duration") or m.get("samples"), f"{path}: an adaptive capture's length is "
                "adaptive.longest; give no duration or samples")
        return
    if got["shortest"] > got["longest"]:
        c.error(a["shortest"], f"{path}.adaptive: shortest {a['shortest'].value!r} is longer than "
                               f"longest {a['longest'].value!r}")
        return
    block = got["block"] or got["shortest"]
    looks = 1 + math.ceil((got["longest"] - got["shortest"]) / block * (1 - 1e-9))
    if looks > MAX_LOOKS:
        c.error(a.get("block") or a["shortest"], f"{path}.adaptive: {looks} looks (re-measurements); "
                                                 f"at most {MAX_LOOKS}: use a longer block")
        return
    values["adaptive"] = Adaptive(got["shortest"], got["longest"], got["block"])
    values["duration"] = got["longest"]


def _capture_extras(c: PlanCollector, m: dict[str, YNode], node: YNode, path: str, values: dict[str, Any]) -> None:
    if "samples" in m:
        n = c.integer(m["samples"], f"{path}.samples", 16, MAX_SAMPLES)
        if "duration" in m:
            c.error(m["samples"], f"{path}: give duration or samples, not both")
        elif n is not None:
            rate = values.get("rate")
            if rate is None:
                c.error(m["samples"], f"{path}: samples needs a rate (here or in defaults.capture)")
            elif rate > 0:
                longest = _yaml_keys(CaptureStep)["duration"].metadata["maximum"]
                if n / rate > longest:
                    c.error(m["samples"], f"{path}: {n} samples at {rate:g} Hz last longer than "
                                          f"the longest capture ({longest:g} s)")
                else:
                    values["duration"] = n / rate
    if values.get("duration") in (None, 0.0):
        if "samples" not in m and "duration" not in m:
            c.error(node, f"{path}: missing required key 'duration' (or samples with rate)")
        elif "duration" in values:
            c.error(m.get("duration"), f"{path}.duration: must be greater than zero")
    rate, duration = values.get("rate"), values.get("duration")
    if rate and duration and rate * duration > MAX_SAMPLES:
        c.error(m.get("duration") or m.get("samples") or m.get("rate") or node,
                f"{path}: {rate * duration:.3g} samples (rate × duration) in one capture; at most "
                f"{MAX_SAMPLES:,}")
    if not values.get("channel"):
        c.error(node, f"{path}: missing required key 'channel' (here or in defaults.capture)")


def _checks(c: PlanCollector, node: YNode | None, path: str, defaults: dict[str, Any],
            budget: derive.WorkBudget, units: dict[str, str] | None = None) -> list[Check]:
    if node is None:
        return []
    units = MEASUREMENT_UNITS if units is None else units
    m = c.mapping(node, path, units)
    if m is None:
        return []
    out = []
    for name, lim in m.items():
        if name not in units:
            continue  # reported by mapping()
        w = parse_limit(c, lim, f"{path}.{name}", name, units[name], defaults["monte_carlo"],
                        budget)
        if w is not None:
            line, col = node.key_pos[name]
            out.append(Check(name, w, line, col))
    return out


__all__ = ["load_plan", "loads_plan", "build_plan", "SupplyStep", "ReadingStep"]
