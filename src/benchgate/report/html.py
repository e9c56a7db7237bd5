"""The HTML unit report: one self-contained file (inline CSS and SVG, no scripts, no URLs).

Rendered with jinja2 and autoescaping on; every string from a user, a plan or an instrument is
escaped, and control characters are shown as ``\\xNN`` rather than passed through. Only the SVG
figures (built by :mod:`benchgate.report.svg`, which escapes its own text) are inserted as markup.
"""

from __future__ import annotations

import datetime as _dt
from collections.abc import Mapping
from pathlib import Path
from typing import Any

from benchgate.analysis.capture import Capture
from benchgate.common.evidence import file_sha256, write_atomic
from benchgate.common.names import MEASUREMENT_TITLES
from benchgate.judge.risk import format_risk
from benchgate.record import CheckRecord, StepRecord, UnitRecord
from benchgate.report import plots, response_plots
from benchgate.report.cautions import GENERAL_CAUTIONS
from benchgate.report.derivation import derivation_rows, value_text
from benchgate.report.svg import esc
from benchgate.units.format import format_quantity, window_text

SAFETY = "Bench work can hurt people and boards; follow local codes and licensed practice."

HEADLINES = {
    "pass": "Unit passed every check",
    "fail": "Unit failed",
    "inconclusive": "Could not decide: a value lies too close to a limit for its uncertainty",
    "error": "Could not test: a measurement or instrument could not be trusted",
    "aborted": "Run aborted before it finished",
}

_ENV = None


def _environment():
    global _ENV
    if _ENV is None:
        import jinja2
        from markupsafe import Markup

        def finalize(value: Any) -> Any:
            if isinstance(value, Markup) or not isinstance(value, str):
                return value
            return Markup(esc(value))  # escape + visible control characters

        _ENV = jinja2.Environment(
            loader=jinja2.FileSystemLoader(str(Path(__file__).parent / "templates")),
            autoescape=True,
            undefined=jinja2.StrictUndefined,
            finalize=finalize,
            trim_blocks=True,
            lstrip_blocks=True,
        )
    return _ENV


def _q(x: float | None, unit: str, digits: int = 4) -> str:
    return "—" if x is None else format_quantity(x, unit, digits)


def limits_text(check: CheckRecord) -> str:
    w = check.window
    return window_text(w.low, w.high, w.unit)


def _short(text: str, limit: int = 800) -> str:
    return text if len(text) <= limit else text[: limit - 1] + "…"


def _check_row(c: CheckRecord, step: StepRecord) -> dict[str, Any]:
    r = c.result
    unit = c.window.unit
    if r is None:
        value, u = "not measured", "—"
    elif not r.valid:
        value, u = "not valid", "—"  # the reason column says why
    else:
        value = _q(r.value, r.unit)
        # GUM (JCGM 100:2008) 7.2.6: an uncertainty is stated with at most two significant digits
        u = "not stated" if r.uncertainty is None else _q(r.uncertainty, r.unit, 2)
    details = [(k, _short(v)) for k, v in derivation_rows(c.window.details, unit)]
    return {
        "step": step.title or step.id,
        "step_id": step.id,
        "measurement": c.measurement,
        "title": MEASUREMENT_TITLES.get(c.measurement, ""),
        "value": value,
        "u": u,
        "limits": limits_text(c),
        "nominal": _q(c.window.nominal, unit) if c.window.nominal is not None else "",
        "derivation": c.window.derived_from,
        "details": details,
        "rule": c.rule,
        "verdict": c.verdict.value,
        "reason": c.reason,
        # JCGM 106:2012 specific risk of this decision, beside the verdict
        "risk": "" if c.risk_kind is None else f"risk of a {c.risk_kind}: {format_risk(c.risk)}",
    }


def _duration(a: str | None, b: str | None) -> str:
    if not a or not b:
        return "—"
    try:
        d = _dt.datetime.fromisoformat(b) - _dt.datetime.fromisoformat(a)
    except (ValueError, TypeError):
        return "—"
    return format_quantity(d.total_seconds(), "s", 3)


def _file_sha256(path: Path) -> str | None:
    try:
        return file_sha256(path)
    except OSError:
        return None


#: capture metadata not repeated in the facts list (shown elsewhere, or local to the machine).
_META_HIDDEN = {"file", "format", "warnings", "response_points", "transfer_points", "mask"}

UNFRAMED_NOTE = ("Taken without framing (serial lines mode): the device sends one text line per sample "
                 "with no checksum or sequence number, so a corrupted line that still reads as a "
                 "valid code, or a dropped line when the device's END count is missing, cannot be "
                 "detected. Values from this capture are less certain than from a framed capture.")


def unframed(metadata: Mapping[str, Any]) -> bool:
    """Whether a capture was taken without framing (serial lines mode).

    Read from the capture's metadata: ``framing: "lines"`` (the serial driver's marker), or the
    instrument entry's ``protocol: "lines"``.
    """
    instrument = metadata.get("instrument")
    protocol = instrument.get("protocol") if isinstance(instrument, Mapping) else None
    return metadata.get("framing") == "lines" or protocol == "lines"


def metadata_rows(metadata: Mapping[str, Any], *, limit: int = 24) -> list[tuple[str, str]]:
    """The capture's metadata as ``(label, text)`` rows, whatever keys the driver wrote."""
    rows = [(str(k).replace("_", " "), _short(value_text(str(k), v, ""), 300))
            for k, v in metadata.items() if str(k) not in _META_HIDDEN]
    if len(rows) > limit:
        rows = rows[: limit - 1] + [("…", f"{len(rows) - limit + 1} more entries in the capture file")]
    return rows


def adaptive_view(story: Any, units: Mapping[str, str]) -> dict[str, Any] | None:
    """An adaptive capture's looks as table rows: per look, each check's value ± U and whether
    it was decided there (judge/sequential.py); and why the capture stopped."""
    if not isinstance(story, Mapping) or not isinstance(story.get("looks"), Mapping):
        return None
    names = [n for n in story["looks"] if isinstance(story["looks"][n], list)]
    by_time: dict[float, dict[str, str]] = {}
    for name in names:
        unit = units.get(name, "")
        for lk in story["looks"][name]:
            v, u = lk.get("value"), lk.get("uncertainty")
            text = "not measured" if v is None else (_q(v, unit) + ("" if u is None else f" ± {_q(u, unit, 2)}"))
            if lk.get("decided"):
                text += f" → {lk['decided']}"
            by_time.setdefault(float(lk.get("seconds", 0.0)), {})[name] = text
    rows = [(_q(t, "s"), [cells.get(n, "—") for n in names]) for t, cells in sorted(by_time.items())]
    return {"names": names, "rows": rows, "stopped": str(story.get("stopped", "")),
            "bound": story.get("early_bound")}


def _step_view(step: StepRecord, captures: Mapping[str, Capture], verify: Path | None) -> dict[str, Any]:
    figures: list[plots.Figure] = []
    notes: list[str] = []
    cap = step.capture
    meta_rows: list[tuple[str, str]] = []
    no_framing = False
    adaptive = None
    if cap is not None:
        capture = captures.get(step.id)
        metadata = cap.metadata or (capture.metadata if capture is not None else {})
        meta_rows = metadata_rows({k: v for k, v in metadata.items() if k != "adaptive"})
        no_framing = unframed(metadata)
        adaptive = adaptive_view(metadata.get("adaptive"), {c.measurement: c.window.unit for c in step.checks})
        if verify is not None:  # a stored report re-rendered: are its capture files still the ones judged?
            found = _file_sha256(verify / cap.file)
            if found is None:
                notes.append(f"capture file {cap.file} is not beside the report")
            elif found != cap.sha256:
                notes.append(f"capture file {cap.file} has changed since the run (SHA-256 differs)")
        source = cap.views if cap.views is not None else capture
        if source is None:
            notes.append("capture not available: plots not drawn")
        else:
            figures, more = plots.capture_figures(source, step.checks, channel=cap.channel)
            notes.extend(n for n in more if n not in cap.warnings and n not in notes)
    figures = [*response_plots.step_figures(step), *figures]  # Bode / transfer plots of driven steps
    bars = [plots.check_figure(c) for c in step.checks]
    return {
        "id": step.id, "kind": step.kind, "title": step.title or step.id, "status": step.status,
        "started": step.started or "—", "ended": step.ended or "—",
        "duration": _duration(step.started, step.ended), "attempts": step.attempts,
        "retried": step.attempts > 1, "answer": step.answer, "error": step.error,
        "notes": list(step.notes), "capture": cap, "figures": figures, "bars": bars,
        "plot_notes": notes, "meta_rows": meta_rows, "unframed": no_framing, "adaptive": adaptive,
        "rate_text": _q(cap.sample_rate, "S/s") if cap is not None else "",
    }


def context(record: UnitRecord, captures: Mapping[str, Capture], verify: Path | None = None) -> dict[str, Any]:
    """Everything the template shows, as plain values (strings escaped by the template).

    ``verify`` is the folder of a stored report being re-rendered: each capture file named in
    the record is checked there against its SHA-256.
    """
    from markupsafe import Markup

    verdict = record.verdict.value
    steps = [_step_view(s, captures, verify) for s in record.steps]
    for s in steps:
        s["figures"] = [{"caption": f.caption, "svg": Markup(f.svg), "kind": f.kind} for f in s["figures"]]
        s["bars"] = [{"caption": f.caption, "svg": Markup(f.svg)} for f in s["bars"]]
    rows = [_check_row(c, s) for s in record.steps for c in s.checks]
    for i, row in enumerate(rows, 1):
        row["index"] = i
    counts = {v: sum(1 for r in rows if r["verdict"] == v) for v in ("pass", "fail", "inconclusive", "error")}
    flags = {str(k): value_text(str(k), v, "") for k, v in record.flags.items()}
    cal_problems = [i.role for i in record.instruments
                    if (i.calibration or {}).get("status", "none") != "valid"]
    headline = HEADLINES.get(verdict, verdict)
    if record.reanalysis_of:
        was = record.reanalysis_of
        headline = (f"Reanalysis without hardware — {headline} (plan v{record.plan_version}); "
                    f"the original run was {was.get('verdict') or '?'} under plan "
                    f"v{was.get('plan_version') or '?'}")
    return {
        "r": record,
        "verdict": verdict,
        "verdict_word": verdict.upper(),
        "reanalysis": bool(record.reanalysis_of),
        "headline": headline,
        "serial_shown": record.serial if record.serial != "" else "(empty serial number)",
        "duration": _duration(record.started, record.ended),
        "rows": rows,
        "counts": counts,
        "steps": steps,
        "retries": [s for s in steps if s["retried"]],
        "unframed_steps": [s["title"] for s in steps if s["unframed"]],
        "unframed_note": UNFRAMED_NOTE,
        "flags": sorted(flags.items()),
        "cal_problems": cal_problems,
        "expired_allowed": bool(record.flags.get("allow_expired_calibration")),
        "safety": SAFETY,
        "general_cautions": GENERAL_CAUTIONS,
    }


def render_html(record: UnitRecord, captures: Mapping[str, Capture] | None = None, *,
                verify: str | Path | None = None) -> str:
    """The HTML report of ``record`` as a string.

    Parameters
    ----------
    record : UnitRecord
        The run; its captures' plots are drawn from the views the run's analysis kept.
    captures : mapping of step id to Capture, optional
        Captures to draw from when the record kept no views (reports from before views were
        kept); missing ones are noted, not fatal.
    verify : path, optional
        The folder of a stored report being re-rendered: each capture file named in the record
        is checked against its SHA-256 and a mismatch is noted. A report written by the run
        itself is not re-hashed (the writer's digest is in the record).
    """
    ctx = context(record, captures or {}, None if verify is None else Path(verify))
    return _environment().get_template("unit.html.j2").render(**ctx)


def write_html(record: UnitRecord, path: str | Path, captures: Mapping[str, Capture] | None = None, *,
               verify: str | Path | None = None) -> Path:
    """Render and write the HTML report atomically; returns ``path``."""
    return write_atomic(path, render_html(record, captures, verify=verify))
