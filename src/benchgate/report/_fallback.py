"""TEMPORARY stand-in for ``benchgate.analysis.views`` and ``analyze`` while they are being written.

Used by :mod:`benchgate.report.plots` only when those modules cannot be imported; to be deleted
as soon as they land. Minimal on purpose: plot data only, no measurement claims.
"""

from __future__ import annotations

import numpy as np

from benchgate.analysis.capture import Capture


def _bh4(n: int) -> np.ndarray:
    # 4-term Blackman-Harris window, F. J. Harris, Proc. IEEE 66(1), 1978, table 1.
    k = np.arange(n) * 2.0 * np.pi / n
    return 0.35875 - 0.48829 * np.cos(k) + 0.14128 * np.cos(2 * k) - 0.01168 * np.cos(3 * k)


def spectrum_db(capture: Capture, *, steady_start: float = 0.0, max_points: int = 2048):
    x = capture.samples[int(steady_start * capture.sample_rate):]
    x = x[np.isfinite(x)]
    if x.size < 16:
        return np.zeros(0), np.zeros(0)
    mag = np.abs(np.fft.rfft((x - x.mean()) * _bh4(x.size)))
    f = np.fft.rfftfreq(x.size, 1.0 / capture.sample_rate)
    peak = mag[1:].max() if mag.size > 1 else 0.0
    db = 20 * np.log10(np.maximum(mag, 1e-300) / (peak or 1.0))
    if f.size > max_points:
        step = int(np.ceil(f.size / max_points))
        m = f.size // step * step
        f = f[:m:step]
        db = db[:m].reshape(-1, step).max(axis=1)
    return f, db


def envelope(capture: Capture, points: int = 600):
    x = capture.samples
    points = max(1, min(points, x.size))
    edges = np.linspace(0, x.size, points + 1).astype(int)
    lo = np.array([x[a:b].min() for a, b in zip(edges[:-1], edges[1:], strict=True)])
    hi = np.array([x[a:b].max() for a, b in zip(edges[:-1], edges[1:], strict=True)])
    return capture.start_time + edges[:-1] / capture.sample_rate, lo, hi


def cycles(capture: Capture, fundamental, n_cycles: int = 4, start=None):
    n = capture.n
    span = int(round(n_cycles * capture.sample_rate / fundamental)) if fundamental else n // 10
    first = n - min(span, n) if start is None else int((start - capture.start_time) * capture.sample_rate)
    first = max(0, min(first, n - 2))
    sl = slice(first, min(n, first + max(span, 2)))
    return capture.times()[sl], capture.samples[sl]


class LiteAnalysis:
    """Just enough of ``Analysis`` for the plots: fundamental and harmonic levels."""

    def __init__(self, capture: Capture, harmonics: int):
        self.warnings: tuple[str, ...] = ("plot stand-in: analysis module not available",)
        self.measurements: dict = {}
        self.steady_start = 0.0
        f, db = spectrum_db(capture, max_points=10**9)
        self.fundamental = float(f[1:][np.argmax(db[1:])]) if f.size > 2 else None
        hs = []
        if self.fundamental:
            for k in range(2, harmonics + 1):
                fk = k * self.fundamental
                if fk >= capture.sample_rate / 2:
                    break
                near = np.abs(f - fk) <= 2 * (f[1] - f[0])
                hs.append((k, fk, float(db[near].max()) if near.any() else None))
        self.harmonics = tuple(hs)


def load_capture(path):
    """Read the agreed ``.npz`` capture format (samples, sample_rate, JSON meta)."""
    import json

    from benchgate.analysis.capture import AdcInfo
    from benchgate.errors import CaptureError

    try:
        with np.load(path, allow_pickle=False) as z:
            samples = np.array(z["samples"], dtype=float)
            rate = float(np.asarray(z["sample_rate"]).reshape(()))
            meta = json.loads(str(z["meta"])) if "meta" in z.files else {}
    except (OSError, KeyError, ValueError) as exc:
        raise CaptureError(f"cannot read capture: {exc}", str(path)) from None
    adc = AdcInfo.from_dict(meta["adc"]) if meta.get("adc") else None
    return Capture(samples, rate, start_time=float(meta.get("start_time", 0.0)),
                   channel=str(meta.get("channel", "ch0")), adc=adc, clock_ppm=meta.get("clock_ppm"),
                   metadata=meta.get("metadata") or {})
