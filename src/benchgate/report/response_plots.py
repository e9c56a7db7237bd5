"""Figures of the generator-driven steps: Bode plots of a sweep and the transfer plot of a level sweep.

The run keeps a sweep's points (frequency, gain in dB with U, phase with U) and its mask's
corners in the metadata of the step's capture record (``response_points``, ``mask``), and a
level sweep's points in ``transfer_points``; each mask point's verdict is its ``gain_db``
check. Gain and phase are drawn against frequency on a logarithmic axis, the mask's limit lines
straight between their corners, each judged point coloured by its verdict.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from typing import Any

from benchgate.record import StepRecord
from benchgate.report import svg
from benchgate.report.plots import Figure
from benchgate.units.format import format_quantity

WIDTH, HEIGHT = 640, 240


def _log_frame(ax: svg.Axes, y_label: str, y_unit: str) -> None:
    """Grid with decade and 2/5 ticks on the x axis (its coordinates are log10 f) and nice y ticks."""
    out = [f'<rect x="{ax.x0}" y="{ax.y1}" width="{ax.x1 - ax.x0}" height="{ax.y0 - ax.y1}" '
           f'fill="#fbfcfd" stroke="{svg.GRID}"/>']
    lo, hi = math.floor(ax.xlo), math.ceil(ax.xhi)
    for decade in range(lo, hi + 1):
        for m in (1, 2, 5):
            x = decade + math.log10(m)
            if not ax.xlo - 1e-9 <= x <= ax.xhi + 1e-9:
                continue
            p = ax.px(x)
            dash = "" if m == 1 else ' stroke-dasharray="2 3"'
            out.append(f'<line x1="{p:.1f}" y1="{ax.y1}" x2="{p:.1f}" y2="{ax.y0}" stroke="{svg.GRID}"{dash}/>')
            out.append(f'<text x="{p:.1f}" y="{ax.y0 + 14}" text-anchor="middle">'
                       f'{svg.esc(format_quantity(10 ** x, "Hz", digits=2))}</text>')
    ticks = svg.nice_ticks(ax.ylo, ax.yhi, 5)
    for y in ticks:
        p = ax.py(y)
        out.append(f'<line x1="{ax.x0}" y1="{p:.1f}" x2="{ax.x1}" y2="{p:.1f}" stroke="{svg.GRID}"/>')
        out.append(f'<text x="{ax.x0 - 6}" y="{p + 4:.1f}" text-anchor="end">{svg.esc(f"{y:g}")}</text>')
    out.append(f'<text x="{(ax.x0 + ax.x1) / 2:.1f}" y="{ax.height - 6}" text-anchor="middle" '
               f'fill="{svg.MUTED}">frequency (log scale)</text>')
    out.append(f'<text x="{ax.x0}" y="{ax.y1 - 9}" text-anchor="start" fill="{svg.MUTED}">'
               f'{svg.esc(f"{y_label} ({y_unit})")}</text>')
    ax.parts[:0] = out


def _range(values: Sequence[float], pad: float, least: float) -> tuple[float, float]:
    vals = [v for v in values if math.isfinite(v)]
    lo, hi = min(vals), max(vals)
    span = max(hi - lo, least)
    mid = (lo + hi) / 2
    return mid - span / 2 - pad * span, mid + span / 2 + pad * span


def bode(points: Sequence[dict[str, Any]], mask: Sequence[Sequence[float | None]],
         verdicts: dict[float, str], *, label: str = "sweep") -> tuple[str, str]:
    """Gain (dB) and phase (deg) against log frequency: the mask's lines, points coloured by verdict.

    ``points``: dicts with ``frequency``, ``gain_db``, ``gain_u``, ``phase``, ``phase_u`` (None
    when not valid); ``mask``: corners ``[frequency, low, high]``; ``verdicts``: frequency ->
    the verdict of the mask check there.
    """
    good = [p for p in points if p.get("gain_db") is not None and p.get("frequency")]
    if len(good) < 2:
        msg = "fewer than two points with a valid gain"
        return svg.empty(f"gain, {label}", msg), svg.empty(f"phase, {label}", msg)
    xs = [math.log10(p["frequency"]) for p in good]
    x_range = (min(xs) - 0.05, max(xs) + 0.05)
    ys = [p["gain_db"] for p in good] + [v for c in mask for v in c[1:] if v is not None]
    gain_ax = svg.Axes(WIDTH, HEIGHT, x_range, _range(ys, 0.08, 6.0))
    _log_frame(gain_ax, "gain", "dB")
    for side in (1, 2):  # the lower, then the upper limit line
        line = [(math.log10(c[0]), c[side]) for c in mask if c[side] is not None and c[0]]
        if len(line) >= 2:
            gain_ax.polyline([a for a, _ in line], [b for _, b in line], colour=svg.WINDOW_EDGE, width=2.0)
    gain_ax.polyline(xs, [p["gain_db"] for p in good])
    for x, p in zip(xs, good, strict=True):
        colour = svg.VERDICT_COLOURS.get(verdicts.get(p["frequency"], ""), svg.TRACE)
        gain_ax.add(f'<circle cx="{gain_ax.px(x):.1f}" cy="{gain_ax.py(p["gain_db"]):.1f}" r="3.5" '
                    f'fill="{colour}" stroke="#ffffff" stroke-width="1"/>')
    phased = [(x, p) for x, p in zip(xs, good, strict=True) if p.get("phase") is not None]
    if len(phased) < 2:
        phase_svg = svg.empty(f"phase, {label}", "fewer than two points with a valid phase")
    else:
        phase_ax = svg.Axes(WIDTH, HEIGHT, x_range, _range([p["phase"] for _, p in phased], 0.08, 30.0))
        _log_frame(phase_ax, "phase", "deg")
        phase_ax.polyline([x for x, _ in phased], [p["phase"] for _, p in phased])
        for x, p in phased:
            phase_ax.add(f'<circle cx="{phase_ax.px(x):.1f}" cy="{phase_ax.py(p["phase"]):.1f}" r="3" '
                         f'fill="{svg.TRACE}"/>')
        phase_svg = phase_ax.svg(f"phase, {label}")
    return gain_ax.svg(f"gain, {label}"), phase_svg


def transfer(points: Sequence[dict[str, Any]], clip: float | None, *, label: str = "level sweep") -> str:
    """Output amplitude against input amplitude (V peak), the clipping point marked when measured."""
    good = [p for p in points if p.get("input") is not None and p.get("output") is not None]
    if len(good) < 2:
        return svg.empty(f"transfer, {label}", "fewer than two valid levels")
    xs, ys = [p["input"] for p in good], [p["output"] for p in good]
    ax = svg.Axes(WIDTH, HEIGHT, (0.0, max(xs) * 1.08), (0.0, max(ys) * 1.12))
    ax.frame("input amplitude", "output amplitude", "V", "V")
    ax.polyline(xs, ys)
    for p in good:
        ax.add(f'<circle cx="{ax.px(p["input"]):.1f}" cy="{ax.py(p["output"]):.1f}" r="3.5" fill="{svg.TRACE}"/>')
    if clip is not None and math.isfinite(clip) and 0 < clip <= max(xs) * 1.08:
        ax.vline(clip, f"clipping point {format_quantity(clip, 'V')}")
    return ax.svg(f"transfer, {label}")


def step_figures(step: StepRecord) -> list[Figure]:
    """The Bode plots of a ``sweep`` step, the transfer plot of a ``level_sweep`` step, else none."""
    meta = step.capture.metadata if step.capture is not None else {}
    if step.kind == "sweep" and meta.get("response_points"):
        verdicts = {c.result.details["frequency_hz"]: c.verdict.value for c in step.checks
                    if c.measurement.startswith("gain_db at ") and c.result is not None and c.result.details
                    and "frequency_hz" in c.result.details}
        gain_svg, phase_svg = bode(meta["response_points"], meta.get("mask") or [], verdicts, label=step.id)
        return [Figure("bode-gain", "Gain against frequency, response mask and each point's verdict", gain_svg),
                Figure("bode-phase", "Phase of the output relative to the input, against frequency", phase_svg)]
    if step.kind == "level_sweep" and meta.get("transfer_points"):
        clip = next((c.result.value for c in step.checks if c.measurement == "clip_level"
                     and c.result is not None and c.result.valid), None)
        return [Figure("transfer", "Output against input amplitude (V peak), clipping point marked",
                       transfer(meta["transfer_points"], clip, label=step.id))]
    return []
