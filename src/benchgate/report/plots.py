"""The figures of one unit report, drawn from the views the run's analysis kept.

Plot data (cycles, envelope, spectrum, fundamental, harmonics, steady part, start-up instant)
comes from :class:`benchgate.analysis.views.CaptureViews`, computed once with the measurements
and carried in the run record; drawing is :mod:`benchgate.report.svg`. Only a record from before
views were kept is analyzed again (:func:`views_of`). A figure that cannot be drawn says why
instead of breaking the report.
"""

from __future__ import annotations

from collections.abc import Iterable
from dataclasses import dataclass

from benchgate.analysis.capture import Capture
from benchgate.analysis.views import VIEW_CYCLES, CaptureViews
from benchgate.common.evidence import finite
from benchgate.record import CheckRecord
from benchgate.report import svg

#: how many cycles of waveform a report shows.
CYCLES = VIEW_CYCLES
#: harmonics marked on the spectrum (2nd … HARMONICS-th).
HARMONICS = 10


@dataclass(frozen=True)
class Figure:
    """One drawn figure: a caption and its ``<svg>`` markup."""

    kind: str  # waveform, envelope, spectrum, check
    caption: str
    svg: str


def views_of(capture: Capture) -> tuple[CaptureViews | None, list[str]]:
    """Views of a capture whose record kept none (a report from before views were kept).

    Returns the views (None when the analysis failed) and the analysis warnings or failure.
    """
    from benchgate.analysis import analyze

    try:
        analysis = analyze(capture, ("frequency",), harmonics=HARMONICS, views=True)
    except Exception as exc:  # the report must still be written: say what went wrong
        return None, [f"analysis for the plots failed: {exc}"]
    return analysis.views, list(analysis.warnings)


def _valid_value(check: CheckRecord | None) -> float | None:
    if check is None or check.result is None or not check.result.valid:
        return None
    return finite(check.result.value)


def capture_figures(views: CaptureViews | Capture | None, checks: Iterable[CheckRecord] = (), *,
                    channel: str = "") -> tuple[list[Figure], list[str]]:
    """Waveform, envelope and spectrum of one capture, plus notes on anything left out.

    Parameters
    ----------
    views : CaptureViews
        The capture's plot data from its analysis (a bare ``Capture`` is analyzed here, for
        records that kept no views).
    checks : iterable of CheckRecord
        The step's checks: a valid ``startup_time`` check gives the start-up instant drawn
        (the value that was judged), a valid ``frequency`` check the fundamental when the
        views have none.
    channel : str
        The channel's name, for the figures' labels.
    """
    notes: list[str] = []
    if isinstance(views, Capture):
        channel = channel or views.channel
        views, notes = views_of(views)
    checks = list(checks)
    by_name = {c.measurement: c for c in checks}
    figures: list[Figure] = []
    label = f"channel {channel}" if channel else "capture"
    if views is None:
        for kind in ("waveform", "envelope", "spectrum"):
            figures.append(Figure(kind, f"{kind.capitalize()}: not drawn", svg.empty(kind, "no plot data")))
        return figures, notes
    # the plotted record's own fundamental first, so the marks sit on the drawn peaks
    fundamental = views.fundamental or _valid_value(by_name.get("frequency"))
    startup = _valid_value(by_name.get("startup_time"))
    if startup is None:
        startup = views.startup
    # least voltage span drawn: a tenth of the converter's range, else 50 mV (common practice)
    min_span = views.full_scale / 10 if views.full_scale else 0.05

    def draw(kind: str, caption: str, make) -> None:
        try:
            figures.append(Figure(kind, caption, make()))
        except Exception as exc:  # one bad figure must not cost the others
            figures.append(Figure(kind, caption, svg.empty(caption, f"could not draw: {exc}")))

    def wave() -> str:
        return svg.waveform(views.cycles_t, views.cycles_v, label=f"waveform, {label}", min_span=min_span)

    def env() -> str:
        return svg.envelope(views.envelope_t, views.envelope_low, views.envelope_high, startup=startup,
                            steady_start=views.steady_start, min_span=min_span, label=f"envelope, {label}")

    def spec() -> str:
        nyquist = float(views.spectrum_f[-1]) if views.spectrum_f.size else None
        f_max = None
        if fundamental:
            f_max = (HARMONICS + 1) * fundamental if nyquist is None else min(nyquist, (HARMONICS + 1) * fundamental)
        return svg.spectrum(views.spectrum_f, views.spectrum_db,
                            harmonics=views.harmonics if fundamental else (), fundamental=fundamental,
                            f_max=f_max, label=f"spectrum, {label}",
                            y_label="level re fundamental" if fundamental else "level re largest bin")

    n_text = f"the last {CYCLES} cycles" if fundamental else "the end (no fundamental found)"
    draw("waveform", f"Waveform: {n_text} of the capture", wave)
    draw("envelope", "Envelope of the whole capture (min/max), start-up instant marked" if startup is not None
         else "Envelope of the whole capture (min/max); no start-up instant was measured", env)
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
