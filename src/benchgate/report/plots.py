"""The figures of one unit report, recomputed from the stored captures.

Plot data comes from ``benchgate.analysis.views`` (spectrum, envelope, cycles) and
``benchgate.analysis.analyze`` (fundamental, harmonics, steady part, start-up time); drawing is
:mod:`benchgate.report.svg`. A figure that cannot be drawn says why instead of breaking the report.
"""

from __future__ import annotations

import math
from collections.abc import Iterable
from dataclasses import dataclass

from benchgate.analysis.capture import Capture
from benchgate.record import CheckRecord
from benchgate.report import svg

#: how many cycles of waveform a report shows.
CYCLES = 4
#: harmonics marked on the spectrum (2nd … HARMONICS-th).
HARMONICS = 10


@dataclass(frozen=True)
class Figure:
    """One drawn figure: a caption and its ``<svg>`` markup."""

    kind: str  # waveform, envelope, spectrum, check
    caption: str
    svg: str


def _analyse(capture: Capture):
    from benchgate.analysis import analyze

    return analyze(capture, ("frequency", "startup_time"), harmonics=HARMONICS)


def _valid_value(check: CheckRecord | None) -> float | None:
    if check is None or check.result is None or not check.result.valid:
        return None
    v = check.result.value
    return v if math.isfinite(v) else None


def capture_figures(capture: Capture, checks: Iterable[CheckRecord] = ()) -> tuple[list[Figure], list[str]]:
    """Waveform, envelope and spectrum of one capture, plus notes on anything left out.

    The start-up instant comes from the step's ``startup_time`` check when it has a valid one
    (the value that was judged), else from the analysis; the fundamental from the analysis of
    the drawn record, else from a valid ``frequency`` check.
    """
    checks = list(checks)
    by_name = {c.measurement: c for c in checks}
    notes: list[str] = []
    figures: list[Figure] = []
    from benchgate.analysis import views

    try:
        analysis = _analyse(capture)
    except Exception as exc:  # the report must still be written: say what went wrong
        analysis = None
        notes.append(f"analysis for the plots failed: {exc}")
    else:
        notes.extend(analysis.warnings)
    # the plotted record's own fundamental first, so the marks sit on the drawn peaks
    fundamental = float(analysis.fundamental) if analysis is not None and analysis.fundamental else None
    if fundamental is None:
        fundamental = _valid_value(by_name.get("frequency"))
    steady = float(analysis.steady_start) if analysis is not None else 0.0
    startup = _valid_value(by_name.get("startup_time"))
    if startup is None and analysis is not None:
        m = analysis.measurements.get("startup_time")
        if m is not None and m.valid:
            startup = m.value
    label = f"channel {capture.channel}"
    # least voltage span drawn: a tenth of the converter's range, else 50 mV (common practice)
    min_span = capture.adc.full_scale / 10 if capture.adc is not None else 0.05

    def draw(kind: str, caption: str, make) -> None:
        try:
            figures.append(Figure(kind, caption, make()))
        except Exception as exc:  # one bad figure must not cost the others
            figures.append(Figure(kind, caption, svg.empty(caption, f"could not draw: {exc}")))

    def wave() -> str:
        t, v = views.cycles(capture, fundamental, n_cycles=CYCLES)
        return svg.waveform(t, v, label=f"waveform, {label}", min_span=min_span)

    def env() -> str:
        # each min/max bucket must span a couple of cycles, or the band shows the waveform
        points = 600 if not fundamental else int(min(600, max(40, capture.duration * fundamental / 2)))
        t, lo, hi = views.envelope(capture, points=points)
        return svg.envelope([x - capture.start_time for x in t], lo, hi, startup=startup,
                            steady_start=steady, min_span=min_span, label=f"envelope, {label}")

    def spec() -> str:
        f, db = views.spectrum_db(capture, steady_start=steady, max_points=2048)
        f_max = min(capture.sample_rate / 2, (HARMONICS + 1) * fundamental) if fundamental else None
        harmonics = analysis.harmonics if analysis is not None else ()
        return svg.spectrum(f, db, harmonics=harmonics if fundamental else (), fundamental=fundamental,
                            f_max=f_max, label=f"spectrum, {label}",
                            y_label="level re fundamental" if fundamental else "level re largest bin")

    n_text = f"the last {CYCLES} cycles" if fundamental else "the end (no fundamental found)"
    draw("waveform", f"Waveform: {n_text} of the record", wave)
    draw("envelope", "Envelope of the whole record (min/max), start-up instant marked" if startup is not None
         else "Envelope of the whole record (min/max); no start-up instant was measured", env)
    draw("spectrum", "Spectrum in dB relative to the fundamental (Blackman–Harris window), harmonics marked"
         if fundamental else "Spectrum in dB relative to its largest bin (no fundamental found)", spec)
    return figures, notes


def check_figure(check: CheckRecord) -> Figure:
    """The bar showing where value ± U sits inside the check's window."""
    w = check.window
    r = check.result
    value = r.value if r is not None and r.valid else None
    u = r.uncertainty if r is not None and r.valid else None
    caption = f"{check.measurement}: value ± U against the window ({check.verdict.value})"
    try:
        drawing = svg.check_bar(value, u, w.low, w.high, unit=w.unit, verdict=check.verdict.value,
                                nominal=w.nominal, guarded=check.rule == "guarded",
                                label=f"{check.measurement} against its window")
    except Exception as exc:
        drawing = svg.empty(caption, f"could not draw: {exc}", height=64)
    return Figure("check", caption, drawing)
