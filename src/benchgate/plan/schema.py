"""JSON Schema (draft 2020-12) for plan files, generated from the model's field metadata.

The shipped copy is ``src/benchgate/schemas/plan.schema.json``; regenerate it with
``python -m benchgate.plan.schema > src/benchgate/schemas/plan.schema.json`` (a test keeps it
in sync). The schema helps editors complete and flag plans; the loader stays the authority
(units, windows and timing are checked there).
"""

from __future__ import annotations

import dataclasses
import json
from pathlib import Path
from typing import Any

from benchgate.common.names import CAPABILITIES, MEASUREMENT_UNITS, READING_UNITS
from benchgate.plan.checks import LIMIT_KEYS
from benchgate.plan.derive import DISTRIBUTIONS, LC_PARTS, MAX_DRAWS, MIN_DRAWS, TOPOLOGIES
from benchgate.plan.model import (
    CAPTURE_DEFAULT_KEYS,
    DECISIONS,
    HAZARD_NAMES,
    MAX_STEPS,
    ON_FAIL,
    STEP_CLASSES,
    Adaptive,
    CaptureStep,
    Hazard,
    Plan,
)
from benchgate.plan.stimulus import CHECK_UNITS

SCHEMA_ID = "https://owl-hollow.invalid/benchgate/plan.schema.json"
_BOOL_WORDS = [True, False, "on", "off", "yes", "no", "true", "false"]
_NUMBER_OR_TEXT = {"type": ["number", "string"]}


def _quantity(unit: str, doc: str) -> dict[str, Any]:
    return {**_NUMBER_OR_TEXT, "description": f"{doc} ({unit}; a number or text such as '20 kHz', '4k7')"}


def _field_schema(md: dict[str, Any]) -> dict[str, Any]:
    kind, doc = md["kind"], md["doc"]
    if kind in ("str", "text"):
        return {"type": "string", "minLength": 1, "description": doc}
    if kind == "int":
        s: dict[str, Any] = {"type": "integer", "description": doc}
        if md["minimum"] is not None:
            s["minimum"] = md["minimum"]
        if md["maximum"] is not None:
            s["maximum"] = md["maximum"]
        return s
    if kind == "bool":
        return {"enum": _BOOL_WORDS, "description": doc}
    if kind == "choice":
        values: list[Any] = list(md["choices"])
        if set(values) == {"yes", "no"}:
            values += [True, False]  # YAML 1.1 reads bare yes/no as booleans
        return {"enum": values, "description": doc}
    if kind == "quantity":
        return _quantity(md["unit"], doc)
    if kind == "list":
        item = {"enum": list(md["choices"])} if md["choices"] else {"type": "string"}
        return {"type": "array", "items": item, "description": doc}
    if kind == "level":
        return {**_NUMBER_OR_TEXT, "description": f"{doc} (a number of volts or text such as '200 mVpp')"}
    if kind == "levels":
        return {"type": "array", "items": {**_NUMBER_OR_TEXT}, "minItems": 1, "description": doc}
    if kind in ("quantities", "band"):
        n = {"minItems": 2, "maxItems": 2} if kind == "band" else {"minItems": 1}
        return {"type": "array", "items": _quantity(md["unit"], "value"), **n, "description": doc}
    if kind == "mask":
        corner = {"type": "object", "additionalProperties": False, "required": ["frequency"],
                  "properties": {"frequency": _quantity("Hz", "corner frequency"),
                                 "min": _quantity("dB", "lower limit line"),
                                 "max": _quantity("dB", "upper limit line")}}
        return {"type": "array", "items": corner, "minItems": 2, "description": doc}
    raise ValueError(kind)


def _keys(cls) -> list[tuple[str, dataclasses.Field]]:
    return [((f.metadata.get("key") or f.name), f) for f in dataclasses.fields(cls)
            if f.metadata.get("yaml", True)]


def _step_schema(kind: str) -> dict[str, Any]:
    cls = STEP_CLASSES[kind]
    props: dict[str, Any] = {}
    required = []
    for key, f in _keys(cls):
        md = f.metadata
        if md["kind"] == "checks":
            names = CHECK_UNITS.get(kind, MEASUREMENT_UNITS)
            props[key] = {"type": "object", "description": md["doc"], "additionalProperties": False,
                          "properties": {n: {"$ref": "#/$defs/limit", "description": f"{n} ({u})"}
                                         for n, u in names.items()}}
        elif md["kind"] == "limit":
            props[key] = {"$ref": "#/$defs/limit", "description": md["doc"]}
        elif md["kind"] == "adaptive":
            props[key] = {"type": "object", "additionalProperties": False, "description": md["doc"],
                          "required": [k for k, f2 in _keys(Adaptive) if f2.metadata["required"]],
                          "properties": {k: _field_schema(f2.metadata) for k, f2 in _keys(Adaptive)}}
        elif key == "kind":
            props[key] = {"const": kind, "description": md["doc"]}
        else:
            props[key] = _field_schema(md)
        if md["required"] and not (kind == "capture" and key == "duration"):
            required.append(key)
    if kind == "capture":
        props["samples"] = {"type": "integer", "minimum": 16,
                            "description": "capture length in samples (instead of duration; needs rate)"}
    if kind == "reading":
        required.append("limit")
    if kind in ("tone", "sweep"):
        required.append("level")
    return {"type": "object", "title": f"{kind} step", "description": (cls.__doc__ or "").strip(),
            "additionalProperties": False, "required": required, "properties": props}


def _circuit_schema(topology: str) -> list[dict[str, Any]]:
    info = TOPOLOGIES[topology]
    base = {"topology": {"const": topology, "description": info["doc"]},
            "monte_carlo": {"$ref": "#/$defs/monte_carlo"}}
    part = {**_NUMBER_OR_TEXT, "description": "value with tolerance, e.g. '6k8 ±5%', '10n 10%'"}
    if topology == "lc_tank":
        out = []
        for kind, (req, opt) in LC_PARTS.items():
            props = dict(base, type={"const": kind})
            props.update({p: part for p in (*req, *opt)})
            out.append({"type": "object", "additionalProperties": False,
                        "required": ["topology", "type", *req], "properties": props})
        return out
    props = dict(base)
    for opt, values in info["options"].items():
        props[opt] = {"type": "integer", "minimum": 3, "maximum": 8} if values == "int" else {"enum": list(values)}
    for p in info["parts"]:
        if p in info["per_section"]:
            props[p] = {"anyOf": [part, {"type": "array", "items": part, "minItems": 3}],
                        "description": "one shared value (each section its own part) or one per section"}
        else:
            props[p] = part
    required = ["topology", *info["required"]] + [o for o, v in info["options"].items() if v != "int"]
    return [{"type": "object", "additionalProperties": False, "required": required, "properties": props}]


def build_schema() -> dict[str, Any]:
    """The plan JSON Schema as a dict."""
    props: dict[str, Any] = {}
    required = []
    for key, f in _keys(Plan):
        md = f.metadata
        if md["kind"] == "steps":
            props[key] = {"type": "array", "minItems": 1, "maxItems": MAX_STEPS, "description": md["doc"],
                          "items": {"oneOf": [{"$ref": f"#/$defs/step_{k}"} for k in STEP_CLASSES]}}
        elif md["kind"] == "hazards":
            hz = {k: _field_schema(f2.metadata) for k, f2 in _keys(Hazard)}
            props[key] = {"type": "array", "description": md["doc"], "items": {
                "type": "object", "additionalProperties": False, "required": ["name", "text"],
                "properties": hz}}
        elif key == "version" or key == "plan":
            props[key] = {"type": ["string", "number"], "description": md["doc"]}
        else:
            props[key] = _field_schema(md)
        if md["required"]:
            required.append(key)
    props["requires"]["uniqueItems"] = True
    cap_fields = dict(_keys(CaptureStep))
    props["defaults"] = {
        "type": "object", "additionalProperties": False, "description": "values steps take unless they say otherwise",
        "properties": {
            "on_fail": {"enum": list(ON_FAIL)},
            "retries": {"type": "integer", "minimum": 0, "maximum": 10},
            "capture": {"type": "object", "additionalProperties": False,
                        "properties": {k: _field_schema(cap_fields[k].metadata) for k in CAPTURE_DEFAULT_KEYS}},
            "monte_carlo": {"$ref": "#/$defs/monte_carlo"},
        },
    }
    defs: dict[str, Any] = {f"step_{k}": _step_schema(k) for k in STEP_CLASSES}
    defs["limit"] = {
        "type": "object", "additionalProperties": False,
        "description": "min/max, nominal with tolerance, or from_circuit (optionally with margin and "
                       "an explicit window whose expected yield is reported)",
        "properties": {
            "min": {**_NUMBER_OR_TEXT, "description": "lower limit, in the measurement's unit"},
            "max": {**_NUMBER_OR_TEXT, "description": "upper limit, in the measurement's unit"},
            "nominal": {**_NUMBER_OR_TEXT, "description": "design value"},
            "tolerance": {**_NUMBER_OR_TEXT, "description": "'±5 %', '+10/-5 %' or '±12 Hz'"},
            "margin": {**_NUMBER_OR_TEXT, "description": "widening of a from_circuit window: '5 %' or '20 Hz'"},
            "decision": {"enum": list(DECISIONS), "description": "decision rule for this check only"},
            "max_risk": _quantity("%", "largest acceptable specific risk of the risk rule for this check"),
            "from_circuit": {"$ref": "#/$defs/circuit"},
        },
    }
    assert set(defs["limit"]["properties"]) == set(LIMIT_KEYS)
    defs["circuit"] = {"description": "the window derived from the design (worst case over tolerance corners)",
                       "oneOf": [s for t in TOPOLOGIES for s in _circuit_schema(t)]}
    defs["monte_carlo"] = {"type": "object", "additionalProperties": False, "properties": {
        "draws": {"type": "integer", "minimum": MIN_DRAWS, "maximum": MAX_DRAWS},
        "seed": {"type": "integer", "minimum": 0},
        "distribution": {"enum": list(DISTRIBUTIONS)}}}
    return {
        "$schema": "https://json-schema.org/draft/2020-12/schema",
        "$id": SCHEMA_ID,
        "title": "benchgate test plan",
        "description": "A benchgate test plan (see docs/plans.md). Reading quantities: "
                       + ", ".join(f"{k} ({v})" for k, v in READING_UNITS.items())
                       + ". Capabilities: " + ", ".join(CAPABILITIES) + ". Hazards: "
                       + ", ".join(HAZARD_NAMES) + ".",
        "type": "object",
        "additionalProperties": False,
        "required": required,
        "properties": props,
        "$defs": defs,
    }


def schema_text() -> str:
    """The schema as the text of the shipped file."""
    return json.dumps(build_schema(), indent=2, ensure_ascii=False) + "\n"


SHIPPED = Path(__file__).resolve().parents[1] / "schemas" / "plan.schema.json"


def write_schema(path: Path = SHIPPED) -> Path:
    """Write the schema to ``path`` (the file shipped in the package by default)."""
    path.write_text(schema_text(), encoding="utf-8")
    return path


if __name__ == "__main__":  # python -m benchgate.plan.schema: regenerate the shipped file
    write_schema()
