"""The lot summary as one self-contained HTML page (inline CSS and SVG, no scripts, printable).

Inline SVG in HTML needs no namespace declaration, so the page holds no URL at all.

:func:`render_summary_html` turns a :class:`benchgate.store.queries.Summary` into the page;
:func:`write_summary_html` writes it. The histograms and Pareto bars are drawn here as small
inline SVG; every text that came from a plan, an operator or an instrument goes through
jinja2's autoescape (or :func:`markupsafe.escape` inside the SVG).
"""

from __future__ import annotations

import math
import os
from datetime import UTC, datetime
from pathlib import Path
from typing import Any
from urllib.parse import quote

from markupsafe import Markup, escape

from benchgate.common.evidence import write_atomic
from benchgate.report.bounds import clip_axis
from benchgate.report.cautions import GENERAL_CAUTIONS
from benchgate.units.format import expected_count_text, format_quantity, window_text

SAFETY = ("Bench work can hurt people and boards: mains-powered instruments, charged capacitors "
          "and hot parts. Follow the plan's cautions, local rules and licensed practice; read the "
          "safety section of the README before using a station.")

# Cpk bands for colouring only (common practice: 1.33 is the usual minimum for a capable process)
CPK_GOOD = 1.33
CPK_POOR = 1.0


def _num(x: float) -> str:
    """A number for an SVG attribute (fixed, short, never 'nan')."""
    return f"{x:.2f}" if math.isfinite(x) else "0"


def _q(x: float | None, unit: str) -> str:
    return format_quantity(x, unit)


def histogram_svg(stats: Any, *, width: int = 360, height: int = 120) -> Markup:
    """A histogram of one check's values with the window limits and the mean marked.

    ``stats`` is a :class:`~benchgate.store.queries.CheckStats`; returns inline SVG markup. The
    axis never extends past what the quantity can physically take (:func:`benchgate.report.bounds.physical_bounds`):
    no negative frequencies, amplitudes or start-up times, no duty cycle above 100 %.
    """
    edges = list(stats.histogram.edges)
    counts = list(stats.histogram.counts)
    lo, hi = clip_axis(edges[0], edges[-1], stats.measurement, stats.unit, stats.min, stats.max)
    top = max(counts) if counts and max(counts) > 0 else 1
    ml, mr, mt, mb = 8, 8, 14, 22  # margins
    pw, ph = width - ml - mr, height - mt - mb

    def x(v: float) -> float:
        return ml + (v - lo) / (hi - lo) * pw if hi > lo else ml + pw / 2

    label = f"{stats.measurement} histogram, {stats.n} values"
    parts = [f'<svg class="hist" width="{width}" height="{height}" '
             f'viewBox="0 0 {width} {height}" role="img" aria-label="{escape(label)}">',
             f'<rect x="{ml}" y="{mt}" width="{pw}" height="{ph}" class="plot"/>']
    for i, c in enumerate(counts):
        if c <= 0:
            continue
        h = c / top * ph
        left, right = x(max(edges[i], lo)), x(min(edges[i + 1], hi))
        outside = ((stats.low is not None and edges[i + 1] <= stats.low)
                   or (stats.high is not None and edges[i] >= stats.high))
        parts.append(f'<rect class="{"bar out" if outside else "bar"}" x="{_num(left)}" '
                     f'y="{_num(mt + ph - h)}" width="{_num(max(right - left - 0.6, 0.6))}" '
                     f'height="{_num(h)}"><title>{c}</title></rect>')
    for name, v in (("LSL", stats.low), ("USL", stats.high)):
        if v is None:
            continue
        xv = x(v)
        text = f"{name} {_q(v, stats.unit)}"
        est = 6.4 * len(text)  # rough width of bold 10 px text
        # LSL label to the left of its line, USL to the right, so the two never overlap;
        # flipped inwards when it would run off the plot
        if name == "LSL":
            anchor, tx = ("end", xv - 3) if xv - 3 - est >= 0 else ("start", xv + 3)
        else:
            anchor, tx = ("start", xv + 3) if xv + 3 + est <= width else ("end", xv - 3)
        parts.append(f'<line class="limit" x1="{_num(xv)}" y1="{mt - 4}" x2="{_num(xv)}" y2="{mt + ph}"/>')
        parts.append(f'<text class="limit" x="{_num(tx)}" y="{mt - 4}" text-anchor="{anchor}">'
                     f'{escape(text)}</text>')
    xm = x(stats.mean)
    parts.append(f'<line class="mean" x1="{_num(xm)}" y1="{mt}" x2="{_num(xm)}" y2="{mt + ph}"/>')
    lo_text, hi_text = _q(lo, stats.unit), _q(hi, stats.unit)
    mean_text = f"μ {_q(stats.mean, stats.unit)}"
    parts.append(f'<text class="axis" x="{ml}" y="{height - 6}">{escape(lo_text)}</text>')
    parts.append(f'<text class="axis" x="{width - mr}" y="{height - 6}" text-anchor="end">'
                 f'{escape(hi_text)}</text>')
    half = 2.8 * len(mean_text)  # half the rough width of 10 px text
    if xm - half > ml + 5.6 * len(lo_text) + 4 and xm + half < width - mr - 5.6 * len(hi_text) - 4:
        parts.append(f'<text class="axis" x="{_num(xm)}" y="{height - 6}" text-anchor="middle">'
                     f'{escape(mean_text)}</text>')
    parts.append("</svg>")
    return Markup("".join(parts))


def bar_svg(value: int, top: int, *, width: int = 160, height: int = 12, kind: str = "fail") -> Markup:
    """A horizontal bar of ``value`` out of ``top`` (for the Pareto tables)."""
    w = 0.0 if top <= 0 else value / top * width
    return Markup(f'<svg class="pbar" width="{width}" '
                  f'height="{height}" viewBox="0 0 {width} {height}" aria-hidden="true">'
                  f'<rect class="track" x="0" y="0" width="{width}" height="{height}"/>'
                  f'<rect class="{escape(kind)}" x="0" y="0" width="{_num(w)}" height="{height}"/></svg>')


def _cpk_class(cpk: float | None) -> str:
    if cpk is None:
        return "na"
    return "good" if cpk >= CPK_GOOD else ("fair" if cpk >= CPK_POOR else "poor")


def _pct(x: float | None) -> str:
    return "—" if x is None else f"{100.0 * x:.1f} %"


def _window(low: float | None, high: float | None, unit: str) -> str:
    return window_text(low, high, unit)


def _field(item: Any, name: str, default: Any = None) -> Any:
    if isinstance(item, dict):
        return item.get(name, default)
    return getattr(item, name, default)


def report_link(report_path: str | os.PathLike[str] | None, page_dir: Path | None) -> str | None:
    """A relative link from the summary page to a unit's HTML report (beside its JSON report).

    ``report_path`` is the report path stored with the run (JSON or HTML, absolute or relative
    to the working folder); ``page_dir`` the folder the summary page is written to (None: the
    working folder). Returns a percent-encoded relative URL, or None when there is no report.
    """
    if not report_path:
        return None
    target = Path(report_path)
    if target.suffix == ".json":
        target = target.with_suffix(".html")
    base = Path.cwd() if page_dir is None else page_dir
    try:
        rel = os.path.relpath(target.resolve(), base.resolve())
    except ValueError:  # another drive (Windows): no relative path exists
        return None
    return quote(Path(rel).as_posix())


def unit_rows(units: Any, page_dir: Path | None) -> list[dict[str, Any]]:
    """The unit list of the page: serial, plan, latest verdict, attempts and the report link.

    ``units`` is a sequence of per-unit entries (objects or dicts) with ``serial``,
    ``plan_id``, ``verdict`` (of the latest attempt), ``attempts``, ``report_path`` (of the
    latest attempt) and, when stored, ``report_file`` (relative to the station's report folder)
    and ``report_sha256``, as the results database reports them.
    """
    rows = []
    for u in units or ():
        verdict = _field(u, "verdict") or "incomplete"
        rows.append({"serial": str(_field(u, "serial", "")), "plan_id": str(_field(u, "plan_id", "") or ""),
                     "verdict": str(verdict), "attempts": _field(u, "attempts", "—"),
                     "link": report_link(_field(u, "report_path"), page_dir),
                     # what a central user asks the station for, and checks the copy against
                     "file": _field(u, "report_file"), "sha": _field(u, "report_sha256") or "not stored"})
    return rows


def _environment():
    import jinja2

    return jinja2.Environment(
        loader=jinja2.PackageLoader("benchgate.report", "templates"),
        autoescape=True, undefined=jinja2.StrictUndefined, trim_blocks=True, lstrip_blocks=True)


def render_summary_html(summary: Any, *, title: str | None = None,
                        generated: datetime | None = None, units: Any = None,
                        page_dir: str | os.PathLike[str] | None = None) -> str:
    """The lot summary page for ``summary`` (a :class:`~benchgate.store.queries.Summary`).

    The unit list comes from ``summary.units`` (or ``units`` when given); each unit's report is
    linked relative to ``page_dir``, the folder the page will be written to.
    """
    from benchgate import __version__

    generated = generated or datetime.now(UTC)
    scope = []
    if summary.plan is not None:
        scope.append(("plan", summary.plan))
    if summary.lot is not None:
        scope.append(("lot", summary.lot))
    if summary.since is not None:
        scope.append(("since", summary.since))
    top_check = max((p.total for p in summary.pareto_checks), default=0)
    top_reason = max((r.count for r in summary.pareto_reasons), default=0)
    checks = [{
        "s": c,
        "window": _window(c.low, c.high, c.unit),
        "mean": _q(c.mean, c.unit), "std": "—" if c.std is None else _q(c.std, c.unit),
        "min": _q(c.min, c.unit), "max": _q(c.max, c.unit),
        "cpk": "—" if c.cpk is None else f"{c.cpk:.2f}", "cpk_class": _cpk_class(c.cpk),
        "sided": "" if c.low is not None and c.high is not None else "one-sided",
        "svg": histogram_svg(c),
    } for c in summary.checks]
    context = {
        "title": title or ("Lot " + summary.lot if summary.lot else "Results summary"),
        "scope": scope,
        "s": summary,
        "fpy": _pct(summary.first_pass_yield),
        "untested": getattr(summary, "units_untested", 0),
        "cut_short": getattr(summary, "cut_short", 0),
        "final": _pct(summary.final_yield),
        # JCGM 106 specific risks summed over the passed units (store/queries.py defines it)
        "false_passes": expected_count_text(getattr(summary, "expected_false_passes", 0.0)),
        "risk_unstated": getattr(summary, "risk_unstated", 0),
        "pareto_checks": [{"p": p, "fail_bar": bar_svg(p.fail, top_check),
                           "other_bar": bar_svg(p.error + p.inconclusive, top_check, kind="error")}
                          for p in summary.pareto_checks],
        "pareto_reasons": [{"r": r, "bar": bar_svg(r.count, top_reason,
                                                    kind="fail" if r.kind == "fail" else "error")}
                           for r in summary.pareto_reasons],
        "checks": checks,
        "units": unit_rows(units if units is not None else getattr(summary, "units", None),
                           None if page_dir is None else Path(page_dir)),
        "generated": generated.astimezone(UTC).strftime("%Y-%m-%d %H:%M UTC"),
        "version": __version__,
        "safety": SAFETY,
        "general_cautions": GENERAL_CAUTIONS,
        "cpk_good": CPK_GOOD,
    }
    return _environment().get_template("summary.html.j2").render(**context)


def write_summary_html(summary: Any, path: str | os.PathLike[str], **kwargs: Any) -> Path:
    """Write the lot summary page to ``path`` (folders created); returns the path."""
    p = Path(path)
    kwargs.setdefault("page_dir", p.parent)
    return write_atomic(p, render_summary_html(summary, **kwargs))
