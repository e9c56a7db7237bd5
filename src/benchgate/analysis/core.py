"""``analyze``: run the registered measurements on one capture and collect its warnings."""

from __future__ import annotations

import math
from collections.abc import Iterable
from dataclasses import dataclass, field
from typing import Any

from benchgate.analysis._growing import GrowingFit
from benchgate.analysis.capture import Capture
from benchgate.analysis.context import Context
from benchgate.analysis.distortion import harmonic_analysis, levels_dbc
from benchgate.analysis.measurement import Measurement
from benchgate.analysis.registry import MEASUREMENTS, measure
from benchgate.common.names import MEASUREMENT_NAMES


@dataclass(frozen=True)
class Analysis:
    """Everything measured on one capture.

    ``steady_start`` is the time (s from the capture start) where the steady part begins;
    ``fundamental`` the fitted frequency (Hz) or None; ``harmonics`` holds
    ``(order, frequency Hz, level dBc)`` for each harmonic considered; ``views`` the plot data
    of the capture (:class:`~benchgate.analysis.views.CaptureViews`) when asked for.
    """

    warnings: tuple[str, ...]
    measurements: dict[str, Measurement]
    steady_start: float
    fundamental: float | None
    harmonics: tuple[tuple[int, float, float], ...]
    samples: int = 0
    sample_rate: float = math.nan
    duration: float = 0.0
    extra: dict[str, Any] = field(default_factory=dict)
    views: Any = None  # benchgate.analysis.views.CaptureViews, when asked for

    def to_dict(self) -> dict[str, Any]:
        """The shape ``benchgate analyze --json`` prints (docs/analyze-output.schema.json)."""
        return {
            "capture": {
                "samples": self.samples,
                "sample_rate": self.sample_rate,
                "duration": self.duration,
                "warnings": list(self.warnings),
                "steady_start": self.steady_start,
            },
            "measurements": {name: _finite(m.to_dict()) for name, m in self.measurements.items()},
        }


def _finite(obj: Any) -> Any:
    """JSON-safe copy: NaN and infinities (e.g. inside details) become None."""
    from benchgate.common.evidence import json_safe  # the one conversion, shared with the reports

    return json_safe(obj)


def analyze(capture: Capture, names: Iterable[str] | None = None, *, harmonics: int = 10,
            views: bool = False, growing: GrowingFit | None = None) -> Analysis:
    """Measure a capture.

    Parameters
    ----------
    capture : Capture
        The capture.
    names : iterable of str, optional
        Measurement names (default: all of ``MEASUREMENT_NAMES``, in that order).
    harmonics : int
        Highest harmonic order summed for THD (and listed in ``Analysis.harmonics``).
    views : bool
        Also gather the plot data of the capture (``Analysis.views``) from the same context,
        with the start-up instant (measured for it when not asked for among ``names``).
    growing : GrowingFit, optional
        When ``capture`` is one look of a growing capture (an adaptive capture step), the sums
        kept over its earlier looks: the tone's four-parameter fit then adds only the new
        samples' sums (same result; :mod:`benchgate.analysis._growing`).

    Returns
    -------
    Analysis

    Raises
    ------
    ValueError
        For an unknown measurement name or ``harmonics < 1``.
    """
    wanted = list(MEASUREMENT_NAMES if names is None else names)
    unknown = [n for n in wanted if n not in MEASUREMENTS]
    if unknown:
        raise ValueError(f"unknown measurement(s) {', '.join(map(repr, unknown))}; known: {', '.join(MEASUREMENTS)}")
    ctx = Context(capture, harmonics=harmonics, growing=growing)
    results = {name: measure(name, capture, ctx) for name in wanted}
    tone = ctx.tone
    fundamental = tone.frequency if tone.ok else None
    harm = levels_dbc(harmonic_analysis(ctx)) if tone.ok else ()
    drawn = None
    if views:
        from benchgate.analysis.views import capture_views

        start = results.get("startup_time") or measure("startup_time", capture, ctx)
        drawn = capture_views(capture, ctx, startup=start.value if start.valid and math.isfinite(start.value)
                              else None)
    return Analysis(
        warnings=ctx.warnings,
        measurements=results,
        steady_start=ctx.steady_start_time,
        fundamental=fundamental,
        harmonics=harm,
        samples=capture.n,
        sample_rate=capture.sample_rate,
        duration=capture.duration,
        views=drawn,
    )
