"""Small inline-SVG plots for the HTML reports: no scripts, no fonts, no external anything.

Each function takes plain numbers (already computed by ``benchgate.analysis.views`` or the judge)
and returns one ``<svg>`` element as a string. Every piece of text placed in an SVG goes through
:func:`esc`, so a channel name or a unit cannot inject markup.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from html import escape

import numpy as np

from benchgate.units.format import format_quantity, value_text

INK = "#1f2933"
GRID = "#d9dee3"
MUTED = "#66727f"
TRACE = "#17608f"
FILL = "#9cc3dc"
MARK = "#b4521e"
WINDOW = "#dcefe3"
WINDOW_EDGE = "#2f7d4f"
HALO = 'stroke="#ffffff" stroke-width="3" stroke-linejoin="round" paint-order="stroke"'
VERDICT_COLOURS = {"pass": "#1e7b48", "fail": "#b42318", "inconclusive": "#a15c00",
                   "error": "#6941c6", "aborted": "#475467"}

_PREFIXES = [(1e9, "G"), (1e6, "M"), (1e3, "k"), (1.0, ""), (1e-3, "m"), (1e-6, "µ"), (1e-9, "n")]
_NO_PREFIX = {"%", "dB", "dBc", "bits", "ppm", ""}


def esc(text: object) -> str:
    """``text`` safe to place in SVG/HTML text or an attribute (control characters shown visibly)."""
    s = "".join(ch if ch in "\t\n" or ord(ch) >= 32 and ord(ch) != 127 else f"\\x{ord(ch):02x}"
                for ch in str(text))
    return escape(s, quote=True)


def nice_ticks(lo: float, hi: float, count: int = 5) -> list[float]:
    """About ``count`` round tick values covering ``lo`` … ``hi`` (steps of 1, 2 or 5 × 10ⁿ).

    The "nice numbers" rule of P. S. Heckbert, *Graphics Gems* (1990), "Nice numbers for graph
    labels".
    """
    if not (math.isfinite(lo) and math.isfinite(hi)):
        return []
    if hi < lo:
        lo, hi = hi, lo
    if hi == lo:
        pad = abs(lo) * 0.1 or 1.0
        lo, hi = lo - pad, hi + pad
    raw = (hi - lo) / max(1, count - 1)
    mag = 10.0 ** math.floor(math.log10(raw))
    frac = raw / mag
    step = mag * (1 if frac < 1.5 else 2 if frac < 3 else 5 if frac < 7 else 10)
    first = math.ceil(lo / step - 1e-9) * step
    ticks = []
    x = first
    while x <= hi + step * 1e-9:
        ticks.append(0.0 if abs(x) < step * 1e-9 else x)
        x = first + len(ticks) * step
    return ticks


def axis_scale(max_abs: float, unit: str) -> tuple[float, str]:
    """A factor and prefixed unit so that axis numbers fall in 1 … 1000 (``(1e-3, "ms")``)."""
    if unit in _NO_PREFIX or not math.isfinite(max_abs) or max_abs == 0:
        return 1.0, unit
    for scale, prefix in _PREFIXES:
        if max_abs >= scale * 0.9995:
            return scale, prefix + unit
    return _PREFIXES[-1][0], _PREFIXES[-1][1] + unit


def _tick_text(x: float, step: float, factor: float) -> str:
    s = abs(step / factor)
    decimals = next((d for d in range(7) if abs(round(s, d) - s) <= 1e-9 * max(s, 1e-300)), 6)
    return f"{x / factor:.{decimals}f}".replace("-", "−")


class Axes:
    """A rectangular plot area mapping data coordinates to SVG pixels."""

    def __init__(self, width: int, height: int, x_range: tuple[float, float], y_range: tuple[float, float],
                 margins: tuple[int, int, int, int] = (26, 14, 38, 58)):
        self.width, self.height = width, height
        top, right, bottom, left = margins
        self.x0, self.x1 = left, width - right
        self.y0, self.y1 = height - bottom, top
        self.xlo, self.xhi = x_range
        self.ylo, self.yhi = y_range
        if self.xhi == self.xlo:
            self.xhi = self.xlo + 1.0
        if self.yhi == self.ylo:
            self.yhi = self.ylo + 1.0
        self.parts: list[str] = []

    def px(self, x: float) -> float:
        return self.x0 + (x - self.xlo) / (self.xhi - self.xlo) * (self.x1 - self.x0)

    def py(self, y: float) -> float:
        return self.y0 + (y - self.ylo) / (self.yhi - self.ylo) * (self.y1 - self.y0)

    def add(self, fragment: str) -> None:
        self.parts.append(fragment)

    def frame(self, x_label: str, y_label: str, x_unit: str, y_unit: str) -> None:
        """Grid, ticks and axis titles (units get an SI prefix chosen from the ranges)."""
        xf, xu = axis_scale(max(abs(self.xlo), abs(self.xhi)), x_unit)
        yf, yu = axis_scale(max(abs(self.ylo), abs(self.yhi)), y_unit)
        xt = nice_ticks(self.xlo, self.xhi, 7)
        yt = nice_ticks(self.ylo, self.yhi, 5)
        xs = xt[1] - xt[0] if len(xt) > 1 else 1.0
        ys = yt[1] - yt[0] if len(yt) > 1 else 1.0
        out = [f'<rect x="{self.x0}" y="{self.y1}" width="{self.x1 - self.x0}" '
               f'height="{self.y0 - self.y1}" fill="#fbfcfd" stroke="{GRID}"/>']
        for x in xt:
            p = self.px(x)
            out.append(f'<line x1="{p:.1f}" y1="{self.y1}" x2="{p:.1f}" y2="{self.y0}" stroke="{GRID}"/>')
            out.append(f'<text x="{p:.1f}" y="{self.y0 + 14}" text-anchor="middle">{esc(_tick_text(x, xs, xf))}</text>')
        for y in yt:
            p = self.py(y)
            out.append(f'<line x1="{self.x0}" y1="{p:.1f}" x2="{self.x1}" y2="{p:.1f}" stroke="{GRID}"/>')
            out.append(f'<text x="{self.x0 - 6}" y="{p + 4:.1f}" text-anchor="end">{esc(_tick_text(y, ys, yf))}</text>')
        xt_label = f"{x_label} ({xu})" if xu else x_label
        yt_label = f"{y_label} ({yu})" if yu else y_label
        out.append(f'<text x="{(self.x0 + self.x1) / 2:.1f}" y="{self.height - 6}" text-anchor="middle" '
                   f'fill="{MUTED}">{esc(xt_label)}</text>')
        out.append(f'<text x="{self.x0}" y="{self.y1 - 9}" text-anchor="start" fill="{MUTED}">{esc(yt_label)}</text>')
        self.parts[:0] = out

    def polyline(self, xs: Sequence[float], ys: Sequence[float], colour: str = TRACE, width: float = 1.4) -> None:
        pts = " ".join(f"{self.px(x):.1f},{self.py(y):.1f}" for x, y in zip(xs, ys, strict=True)
                       if math.isfinite(x) and math.isfinite(y))
        if pts:
            self.add(f'<polyline points="{pts}" fill="none" stroke="{colour}" stroke-width="{width}" '
                     'stroke-linejoin="round"/>')

    def vline(self, x: float, label: str, colour: str = MARK, anchor_right: bool | None = None) -> None:
        p = self.px(x)
        if anchor_right is None:
            anchor_right = p > (self.x0 + self.x1) / 2
        anchor, dx = ("end", -4) if anchor_right else ("start", 4)
        self.add(f'<line x1="{p:.1f}" y1="{self.y1}" x2="{p:.1f}" y2="{self.y0}" stroke="{colour}" '
                 'stroke-width="1.5" stroke-dasharray="5 3"/>')
        self.add(f'<text x="{p + dx:.1f}" y="{self.y1 + 13}" text-anchor="{anchor}" fill="{colour}" '
                 f'font-weight="600" {HALO}>{esc(label)}</text>')

    def svg(self, label: str) -> str:
        body = "".join(self.parts)
        return (f'<svg class="plot" viewBox="0 0 {self.width} {self.height}" '
                f'width="{self.width}" height="{self.height}" role="img" aria-label="{esc(label)}" '
                f'font-family="sans-serif" font-size="11" fill="{INK}">'
                f"<title>{esc(label)}</title>{body}</svg>")


def _finite(a: Sequence[float]) -> np.ndarray:
    arr = np.asarray(a, dtype=float)
    return arr[np.isfinite(arr)]


def _padded(lo: float, hi: float, frac: float = 0.06, min_span: float = 0.0) -> tuple[float, float]:
    if hi - lo < min_span:  # a flat record must look flat, not like a signal of one LSB
        mid = (hi + lo) / 2
        lo, hi = mid - min_span / 2, mid + min_span / 2
    span = hi - lo
    pad = span * frac if span > 0 else (abs(lo) * 0.1 or 1.0)
    return lo - pad, hi + pad


def empty(label: str, message: str, width: int = 640, height: int = 70) -> str:
    """A placeholder figure saying why a plot could not be drawn."""
    return (f'<svg class="plot" viewBox="0 0 {width} {height}" width="{width}" '
            f'height="{height}" role="img" aria-label="{esc(label)}" font-family="sans-serif" font-size="12">'
            f'<title>{esc(label)}</title><rect x="1" y="1" width="{width - 2}" height="{height - 2}" '
            f'fill="#f6f7f9" stroke="{GRID}" stroke-dasharray="4 3"/><text x="{width / 2}" y="{height / 2 + 4}" '
            f'text-anchor="middle" fill="{MUTED}">{esc(message)}</text></svg>')


def waveform(t: Sequence[float], v: Sequence[float], *, label: str = "waveform", unit: str = "V",
             min_span: float = 0.0, width: int = 640, height: int = 220) -> str:
    """A few cycles of the signal: time (s, from the first point shown) against voltage.

    ``min_span`` is the least voltage range the axis shows (so noise on a flat line stays small).
    """
    t = np.asarray(t, dtype=float)
    v = np.asarray(v, dtype=float)
    fv = _finite(v)
    if t.size < 2 or fv.size < 2:
        return empty(label, "too few samples to draw")
    t = t - t[0]
    ax = Axes(width, height, (0.0, float(t[-1])), _padded(float(fv.min()), float(fv.max()), min_span=min_span))
    ax.frame("time", "voltage", "s", unit)
    ax.polyline(t, v)
    return ax.svg(label)


def envelope(t: Sequence[float], low: Sequence[float], high: Sequence[float], *, startup: float | None = None,
             steady_start: float | None = None, label: str = "envelope", unit: str = "V",
             min_span: float = 0.0, width: int = 640, height: int = 220) -> str:
    """The whole capture as a min/max band, with the start-up instant and the steady part marked.

    ``t`` is time from the capture start (s); ``startup`` and ``steady_start`` are in the same time.
    """
    t = np.asarray(t, dtype=float)
    lo = np.asarray(low, dtype=float)
    hi = np.asarray(high, dtype=float)
    ok = np.isfinite(t) & np.isfinite(lo) & np.isfinite(hi)
    if ok.sum() < 2:
        return empty(label, "too few samples to draw")
    t, lo, hi = t[ok], lo[ok], hi[ok]
    ax = Axes(width, height, (0.0, max(float(t[-1]), 1e-12)), _padded(float(lo.min()), float(hi.max()),
                                                                         min_span=min_span))
    ax.frame("time from capture start", "voltage", "s", unit)
    if steady_start is not None and math.isfinite(steady_start) and 0 <= steady_start < t[-1]:
        x = ax.px(steady_start)
        ax.add(f'<rect x="{x:.1f}" y="{ax.y1}" width="{ax.x1 - x:.1f}" height="{ax.y0 - ax.y1}" '
               'fill="#e8f1f7" opacity="0.8"/>')
        ax.add(f'<text x="{ax.x1}" y="{ax.y1 - 9}" text-anchor="end" fill="{MUTED}">'
               'shaded: steady part (analyzed)</text>')
    pts = [f"{ax.px(a):.1f},{ax.py(b):.1f}" for a, b in zip(t, hi, strict=True)]
    pts += [f"{ax.px(a):.1f},{ax.py(b):.1f}" for a, b in zip(t[::-1], lo[::-1], strict=True)]
    ax.add(f'<polygon points="{" ".join(pts)}" fill="{FILL}" stroke="{TRACE}" stroke-width="0.8"/>')
    if startup is not None and math.isfinite(startup) and 0 <= startup <= t[-1]:
        ax.vline(startup, f"start-up {format_quantity(startup, 's')}")
    return ax.svg(label)


def spectrum(f: Sequence[float], level_db: Sequence[float], *, harmonics: Sequence[tuple] = (),
             fundamental: float | None = None, f_max: float | None = None, label: str = "spectrum",
             y_label: str = "level re fundamental", width: int = 640, height: int = 240) -> str:
    """Spectrum in dB relative to the fundamental, with the fundamental and harmonics marked.

    ``harmonics`` holds ``(k, freq_hz, level_dbc)`` tuples (k ≥ 2), as ``Analysis.harmonics``.
    """
    f = np.asarray(f, dtype=float)
    db = np.asarray(level_db, dtype=float)
    keep = np.isfinite(f) & np.isfinite(db)
    if f_max is not None:
        keep &= f <= f_max
    if keep.sum() < 2:
        return empty(label, "no spectrum to draw")
    f, db = f[keep], db[keep]
    floor = max(float(np.percentile(db, 1)), -160.0)
    bottom = math.floor(floor / 20.0) * 20.0
    ax = Axes(width, height, (0.0, float(f[-1])), (bottom, 10.0))
    ax.frame("frequency", y_label, "Hz", "dB")
    ax.polyline(f, np.maximum(db, bottom), width=1.0)
    if fundamental is not None and math.isfinite(fundamental) and fundamental <= f[-1]:
        x, y = ax.px(fundamental), ax.py(0.0)
        ax.add(f'<circle cx="{x:.1f}" cy="{y:.1f}" r="3.5" fill="{MARK}"/>')
        ax.add(f'<text x="{x + 6:.1f}" y="{y - 4:.1f}" fill="{MARK}" font-weight="600" {HALO}>'
               f'f₀ {esc(format_quantity(fundamental, "Hz"))}</text>')
    for item in harmonics:
        k, fk, lvl = item[0], float(item[1]), item[2]
        if not (math.isfinite(fk) and fk <= f[-1]):
            continue
        y_val = float(lvl) if lvl is not None and math.isfinite(float(lvl)) else bottom
        x, y = ax.px(fk), ax.py(max(y_val, bottom))
        ax.add(f'<path d="M{x - 4:.1f},{y - 9:.1f} L{x + 4:.1f},{y - 9:.1f} L{x:.1f},{y - 3:.1f} Z" fill="{MARK}"/>')
        ax.add(f'<text x="{x:.1f}" y="{y - 12:.1f}" text-anchor="middle" fill="{MARK}" font-size="10" {HALO}>{esc(k)}</text>')
    return ax.svg(label)


def check_bar(value: float | None, uncertainty: float | None, low: float | None, high: float | None, *,
              unit: str, verdict: str, nominal: float | None = None, guarded: bool = False,
              label: str = "check", width: int = 640, height: int = 64) -> str:
    """Where value ± U sits inside the acceptance window (open sides run to the edge)."""
    colour = VERDICT_COLOURS.get(verdict, INK)
    have_value = value is not None and math.isfinite(value)
    u = uncertainty if (uncertainty is not None and math.isfinite(uncertainty) and uncertainty >= 0) else None
    pts = [x for x in (low, high, nominal) if x is not None and math.isfinite(x)]
    if have_value:
        pts += [value] + ([value - u, value + u] if u else [])
    if not pts:
        return empty(label, "no limits and no value", width, height)
    lo_pt, hi_pt = min(pts), max(pts)
    span = hi_pt - lo_pt or (abs(lo_pt) * 0.2 or 1.0)
    open_pad = 0.35 if (low is None or high is None) else 0.12
    x_lo = lo_pt - span * (open_pad if low is None else 0.12)
    x_hi = hi_pt + span * (open_pad if high is None else 0.12)
    ax = Axes(width, height, (x_lo, x_hi), (0.0, 1.0), margins=(22, 18, 18, 18))
    yb, hb = ax.y1 + 8, ax.y0 - ax.y1 - 8
    w0 = ax.px(low) if low is not None else ax.x0
    w1 = ax.px(high) if high is not None else ax.x1
    ax.add(f'<rect x="{ax.x0}" y="{yb}" width="{ax.x1 - ax.x0}" height="{hb}" fill="#f3e8e7"/>')
    ax.add(f'<rect x="{w0:.1f}" y="{yb}" width="{max(w1 - w0, 1):.1f}" height="{hb}" fill="{WINDOW}"/>')
    for lim, name in ((low, "low"), (high, "high")):
        if lim is None:
            continue
        p = ax.px(lim)
        ax.add(f'<line x1="{p:.1f}" y1="{yb - 3}" x2="{p:.1f}" y2="{yb + hb + 3}" stroke="{WINDOW_EDGE}" stroke-width="2"/>')
        anchor = "end" if name == "low" else "start"
        dx = -3 if name == "low" else 3
        ax.add(f'<text x="{p + dx:.1f}" y="{yb + hb + 14}" text-anchor="{anchor}" fill="{WINDOW_EDGE}">'
               f'{esc(format_quantity(lim, unit))}</text>')
    if guarded and u:
        for lim, sign in ((low, 1), (high, -1)):
            if lim is not None:
                p = ax.px(lim + sign * u)
                ax.add(f'<line x1="{p:.1f}" y1="{yb}" x2="{p:.1f}" y2="{yb + hb}" stroke="{WINDOW_EDGE}" '
                       'stroke-dasharray="3 2"/>')
    if nominal is not None and math.isfinite(nominal):
        p = ax.px(nominal)
        ax.add(f'<path d="M{p - 4:.1f},{yb + hb + 1} L{p + 4:.1f},{yb + hb + 1} L{p:.1f},{yb + hb - 5} Z" fill="{MUTED}"/>')
    mid = yb + hb / 2
    if have_value:
        p = ax.px(value)
        if u:
            a, b = ax.px(value - u), ax.px(value + u)
            ax.add(f'<line x1="{a:.1f}" y1="{mid}" x2="{b:.1f}" y2="{mid}" stroke="{colour}" stroke-width="2.5"/>')
            for e in (a, b):
                ax.add(f'<line x1="{e:.1f}" y1="{mid - 6}" x2="{e:.1f}" y2="{mid + 6}" stroke="{colour}" stroke-width="2"/>')
        ax.add(f'<circle cx="{p:.1f}" cy="{mid}" r="5" fill="{colour}" stroke="#ffffff" stroke-width="1.5"/>')
        # GUM (JCGM 100:2008) 7.2.6: U with at most two significant digits
        text = value_text(value, u, unit, u_digits=2) + ("" if u is not None else " (no U)")
        anchor = "end" if p > (ax.x0 + ax.x1) / 2 else "start"
        ax.add(f'<text x="{p:.1f}" y="{yb - 5}" text-anchor="{anchor}" fill="{colour}" font-weight="600">{esc(text)}</text>')
    else:
        ax.add(f'<text x="{(ax.x0 + ax.x1) / 2:.1f}" y="{mid + 4}" text-anchor="middle" fill="{colour}" '
               'font-weight="600">no valid value</text>')
    return ax.svg(label)
