"""``benchgate inspect PLAN [--json]``: validate a plan and show every step, check and window."""

from __future__ import annotations

import argparse
import json
import sys
from typing import Any


def add_parser(subparsers) -> None:
    p = subparsers.add_parser(
        "inspect",
        help="validate a test plan and show its steps, windows and how they were derived",
        description="Validate a test plan. Prints each step with its checks and windows (nominal, "
        "low, high, unit), how each window was derived (formula and tolerance corner), the "
        "gain a design needs, the Monte Carlo spread and yield, and the plan's cautions and "
        "hazards. Exit 0 if the plan is valid, 2 with one line per error otherwise.",
    )
    p.add_argument("plan", metavar="PLAN", help="plan file (YAML)")
    p.add_argument("--json", action="store_true", help="print one JSON object instead of a table")
    p.set_defaults(func=run)


def run(args: argparse.Namespace) -> int:
    from benchgate.errors import PlanErrors
    from benchgate.plan import load_plan

    try:
        plan = load_plan(args.plan)
    except PlanErrors as exc:
        if not args.json:
            raise
        lines = exc.lines()
        print(json.dumps({"plan": None, "version": None, "hash": None, "steps": [],
                          "errors": lines}, indent=2, ensure_ascii=False))
        for line in lines:
            print(f"benchgate: {line}", file=sys.stderr)
        return exc.exit_code
    data = plan_summary(plan)
    if args.json:
        print(json.dumps(data, indent=2, ensure_ascii=False))
        return 0
    if sys.stdout.isatty():
        _print_rich(data)
    else:
        print("\n".join(plain_lines(data)))
    return 0


# ----------------------------------------------------------------------------- data


def _check_dict(ch) -> dict[str, Any]:
    w = ch.window
    d = w.details or {}
    mc = d.get("monte_carlo") or {}
    return {
        "measurement": ch.measurement,
        "unit": w.unit,
        "nominal": w.nominal,
        "low": w.low,
        "high": w.high,
        "derived_from": w.derived_from,
        "decision": w.decision,
        "formula": d.get("formula"),
        "worst_case": d.get("worst_case"),
        "low_corner": d.get("low_corner"),
        "high_corner": d.get("high_corner"),
        "gain_needed": d.get("gain_needed"),
        "monte_carlo": mc or None,
        "line": ch.line,
        "column": ch.column,
        "details": dict(d),
    }


_SETTINGS = {
    "supply": ("voltage", "current_limit", "output"),
    "wait": ("seconds",),
    "prompt": ("text", "ask", "expect", "unattended_answer"),
    "capture": ("instrument", "channel", "rate", "duration", "range", "power_on", "harmonics"),
    "reading": ("instrument", "quantity", "settle"),
    "tone": ("instrument", "input_channel", "output_channel", "frequency", "level", "level_unit", "settle",
             "duration"),
    "sweep": ("instrument", "input_channel", "output_channel", "frequencies", "start", "stop",
              "points_per_decade", "level", "level_unit", "settle"),
    "level_sweep": ("instrument", "input_channel", "output_channel", "frequency", "levels", "level_unit",
                    "output_level", "thd_limit", "settle"),
}


def plan_summary(plan) -> dict[str, Any]:
    """The ``inspect --json`` object for a loaded plan."""
    steps = []
    for s in plan.steps:
        steps.append({
            "id": s.id, "title": s.title, "kind": s.kind, "on_fail": s.on_fail,
            "retries": s.retries, "retry_prompt": s.retry_prompt,
            "settings": {k: getattr(s, k) for k in _SETTINGS[s.kind]},
            "checks": [_check_dict(ch) for ch in s.checks],
        })
    return {
        "plan": plan.id, "version": plan.version, "product": plan.product, "hash": plan.hash,
        "path": plan.path, "description": plan.description, "decision": plan.decision,
        "requires": sorted(plan.requires), "cautions": list(plan.cautions),
        "hazards": [{"name": h.name, "text": h.text} for h in plan.hazards],
        "notes": list(plan.notes), "steps": steps, "errors": [],
    }


# ----------------------------------------------------------------------------- text


def _q(x, unit: str) -> str:
    from benchgate.units.format import format_quantity

    return format_quantity(x, unit)


def _settings_text(step: dict[str, Any]) -> str:
    st = step["settings"]
    k = step["kind"]
    if k == "supply":
        parts = []
        if st["voltage"] is not None:
            parts.append(_q(st["voltage"], "V"))
        if st["current_limit"] is not None:
            parts.append(f"limit {_q(st['current_limit'], 'A')}")
        if st["output"] is not None:
            parts.append("output on" if st["output"] else "output off")
        return ", ".join(parts)
    if k == "wait":
        return _q(st["seconds"], "s")
    if k == "prompt":
        extra = f" [ask; continue on {st['expect']}; unattended: {st['unattended_answer'] or 'stop'}]" if st["ask"] else ""
        return f"{st['text']}{extra}"
    if k == "capture":
        rate = "default rate" if st["rate"] is None else _q(st["rate"], "S/s")
        return (f"{st['instrument']}:{st['channel']}, {rate}, {_q(st['duration'], 's')}"
                + (", power on at start" if st["power_on"] else "") + f", {st['harmonics']} harmonics")
    if k in ("tone", "sweep", "level_sweep"):
        return _stimulus_text(k, st)
    return f"{st['quantity']} from the {st['instrument']}, settle {_q(st['settle'], 's')}"


def _stimulus_text(kind: str, st: dict[str, Any]) -> str:
    """A generator-driven step: what is driven, where it is recorded."""
    where = f"{st['instrument']}:{st['input_channel']}+{st['output_channel']}"
    unit = st["level_unit"]
    if kind == "tone":
        what = f"{_q(st['frequency'], 'Hz')} at {st['level']:g} {unit}"
    elif kind == "sweep":
        if st["frequencies"]:
            span = f"{len(st['frequencies'])} points {_q(st['frequencies'][0], 'Hz')} … {_q(st['frequencies'][-1], 'Hz')}"
        else:
            span = f"{_q(st['start'], 'Hz')} … {_q(st['stop'], 'Hz')}, {st['points_per_decade']} per decade"
        what = f"{span} at {st['level']:g} {unit}"
    else:
        what = f"{_q(st['frequency'], 'Hz')} at {len(st['levels'])} levels {st['levels'][0]:g} … {st['levels'][-1]:g} {unit}"
    return f"generator {what}; recorded on {where}, settle {_q(st['settle'], 's')}"


def derivation_lines(ch: dict[str, Any]) -> list[str]:
    """Lines explaining a derived window (empty for a given one)."""
    if not ch["formula"]:
        return []
    u = ch["unit"]
    out = [f"formula: {ch['formula']}"]
    if ch["worst_case"]:
        lo, hi = ch["worst_case"]

        def corner(c):
            return " ".join(f"{k}{v}" for k, v in c.items()) or "nominal"
        out.append(f"worst case {_q(lo, u)} at [{corner(ch['low_corner'])}], "
                   f"{_q(hi, u)} at [{corner(ch['high_corner'])}]")
    g = ch["gain_needed"]
    if g:
        out.append(f"gain needed {g['nominal']:.2f} (worst corner {g['worst']:.2f})")
    mc = ch["monte_carlo"]
    if mc:
        y = "—" if mc["yield"] is None else f"{100 * mc['yield']:.2f} % ± {100 * mc['yield_u']:.2f} % inside the given window"
        out.append(f"Monte Carlo {mc['draws']} draws ({mc['distribution']}, seed {mc['seed']}): mean "
                   f"{_q(mc['mean'], u)}, σ {_q(mc['std'], u)}, 99.73 % within "
                   f"{_q(mc['p0_135'], u)} … {_q(mc['p99_865'], u)}; yield {y}")
    return out


def plain_lines(data: dict[str, Any]) -> list[str]:
    out = [f"{data['plan']} {data['version']} — {data['product']}",
           f"file {data['path']}", f"hash {data['hash']}",
           f"decision {data['decision']}; requires {', '.join(data['requires']) or 'nothing'}"]
    out.append("cautions:" if data["cautions"] else "cautions: none")
    out += [f"  - {c}" for c in data["cautions"]]
    out.append("hazards (each needs acknowledgement):" if data["hazards"] else "hazards: none")
    out += [f"  - {h['name']}: {h['text']}" for h in data["hazards"]]
    out.append("steps:")
    for i, s in enumerate(data["steps"], start=1):
        flags = f"on_fail {s['on_fail']}" + (f", retries {s['retries']}" if s["retries"] else "")
        out.append(f"{i:3d}. {s['id']} [{s['kind']}] {s['title']} ({flags})")
        out.append(f"       {_settings_text(s)}")
        if s["retry_prompt"]:
            out.append(f"       retry prompt: {s['retry_prompt']}")
        for ch in s["checks"]:
            u = ch["unit"]
            out.append(f"       check {ch['measurement']} [{u}]: nominal {_q(ch['nominal'], u)}, "
                       f"low {_q(ch['low'], u)}, high {_q(ch['high'], u)}"
                       + (f", decision {ch['decision']}" if ch["decision"] else ""))
            out.append(f"         derived from: {ch['derived_from']}")
            out += [f"         {line}" for line in derivation_lines(ch)]
    if data["notes"]:
        out.append("notes:")
        out += [f"  {n}" for n in data["notes"]]
    out.append("plan is valid")
    return out


def _print_rich(data: dict[str, Any]) -> None:
    from rich.console import Console
    from rich.markup import escape as e
    from rich.table import Table

    con = Console()
    con.print(f"[bold]{e(data['plan'])}[/bold] {e(data['version'])} — {e(data['product'])}", highlight=False)
    con.print(f"hash {data['hash']}  decision [bold]{data['decision']}[/bold]  requires "
              f"{', '.join(data['requires']) or 'nothing'}", highlight=False)
    for c in data["cautions"]:
        con.print(f"[yellow]caution[/yellow] {e(c)}", highlight=False)
    for h in data["hazards"]:
        con.print(f"[red bold]hazard {e(h['name'])}[/red bold] {e(h['text'])}", highlight=False)
    for i, s in enumerate(data["steps"], start=1):
        flags = f"on_fail {s['on_fail']}" + (f", retries {s['retries']}" if s["retries"] else "")
        con.print(f"[bold]{i}. {e(s['id'])}[/bold] {e('[' + s['kind'] + ']')} {e(s['title'])} ({flags})",
                  highlight=False)
        con.print(f"   {e(_settings_text(s))}", highlight=False)
        if not s["checks"]:
            continue
        t = Table(box=None, padding=(0, 1), show_edge=False)
        for col, just in (("check", "left"), ("unit", "left"), ("nominal", "right"), ("low", "right"),
                          ("high", "right"), ("derived from", "left")):
            t.add_column(col, justify=just, overflow="fold")
        for ch in s["checks"]:
            u = ch["unit"]
            t.add_row(ch["measurement"], u, _q(ch["nominal"], u), _q(ch["low"], u), _q(ch["high"], u),
                      e(ch["derived_from"]))
        con.print(t)
        for ch in s["checks"]:
            for line in derivation_lines(ch):
                con.print(f"   [dim]{ch['measurement']}:[/dim] {e(line)}", highlight=False)
    for n in data["notes"]:
        con.print(f"[cyan]{e(n)}[/cyan]", highlight=False)
    con.print("[green]plan is valid[/green]")
