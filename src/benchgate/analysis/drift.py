"""Frequency drift: slope of the frequency over successive windows of the steady part."""

from __future__ import annotations

import math

import numpy as np

from benchgate.analysis.capture import Capture
from benchgate.analysis.context import Context, get_context
from benchgate.analysis.measurement import Measurement
from benchgate.analysis.sinefit import Workspace
from benchgate.analysis.uncertainty import clock_std, expand

#: most windows the steady part is cut into; each holds at least 2 cycles.
MAX_WINDOWS = 16
MIN_WINDOWS = 4
#: most windows when a strong drift needs shorter ones (each still holds at least 2 cycles).
MAX_REFINED_WINDOWS = 1024


def window_phases(y: np.ndarray, omega: float, windows: int,
                  work: Workspace | None = None) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Phase (rad, unwrapped), amplitude and centre (samples) of a fixed-ω three-parameter fit per window.

    The cosine and sine are computed once for the whole record (or taken from ``work``, set
    at ω); the per-window 3×3 normal equations come from segment sums (``numpy.add.reduceat``).
    """
    n = y.size
    if work is None or work.n != n:
        work = Workspace(n)
        work.set(omega)
    c, s = work.c, work.s
    bounds = np.linspace(0, n, windows + 1).round().astype(np.int64)
    starts = bounds[:-1]
    cnt = np.diff(bounds).astype(float)

    def seg(v: np.ndarray) -> np.ndarray:
        return np.add.reduceat(v, starts)

    g = np.empty((windows, 3, 3))
    g[:, 0, 0] = seg(c * c)
    g[:, 1, 1] = seg(s * s)
    g[:, 0, 1] = g[:, 1, 0] = seg(c * s)
    g[:, 0, 2] = g[:, 2, 0] = seg(c)
    g[:, 1, 2] = g[:, 2, 1] = seg(s)
    g[:, 2, 2] = cnt
    r = np.stack([seg(y * c), seg(y * s), seg(y)], axis=1)
    p = np.linalg.solve(g, r[..., None])[..., 0]
    phase = np.unwrap(np.arctan2(-p[:, 1], p[:, 0]))
    amp = np.hypot(p[:, 0], p[:, 1])
    centre = starts + (cnt - 1) / 2.0
    return phase, amp, centre


def frequency_drift(capture: Capture, *, context: Context | None = None) -> Measurement:
    """Slope (Hz/s) of the frequency over the steady part.

    Parameters
    ----------
    capture : Capture
    context : Context, optional

    Returns
    -------
    Measurement
        Invalid without a trusted tone, with fewer than 8 cycles (4 windows of 2 cycles), or
        when the window phases cannot be unwrapped (more than π/4 between neighbours).

    Notes
    -----
    The steady part is cut into 4 to 16 equal windows (more, up to 1024, when the phase
    turns by more than π/4 between neighbouring windows); a three-parameter fit at the fitted
    frequency gives each window's phase; a least-squares quadratic φ(t) = p₀ + p₁t + p₂t²
    gives the drift df/dt = p₂/π. The phase noise used for U is the larger of the
    regression residual and the Cramér–Rao phase term √(2σ²/(M·A²)) per window of M samples.

    References
    ----------
    IEEE Std 1057-2017 (three-parameter fit); Kay (1993) for the phase variance; linear
    least squares with its covariance, JCGM 100:2008 for the budget.
    """
    ctx = get_context(capture, context)
    tone = ctx.tone
    if not tone.ok or tone.fit is None:
        return Measurement.invalid("frequency_drift", "Hz/s", tone.reason or "no tone")
    windows = min(MAX_WINDOWS, int(tone.cycles // 2))
    if windows < MIN_WINDOWS:
        return Measurement.invalid("frequency_drift", "Hz/s",
                                   f"fewer than {2 * MIN_WINDOWS} cycles in the steady part")
    fs = capture.sample_rate
    y = ctx.y
    most = min(MAX_REFINED_WINDOWS, int(tone.cycles // 2))
    while True:
        phase, amp, centre = window_phases(y, tone.fit.omega, windows, ctx.fit_workspace())
        t = (centre - (y.size - 1) / 2.0) / fs
        v = np.stack([np.ones_like(t), t, t * t], axis=1)
        coef, *_ = np.linalg.lstsq(v, phase, rcond=None)
        # a strong drift turns the phase by more than π/4 between neighbouring windows, where
        # unwrapping becomes ambiguous (and the fixed-ω fit of each window smears): use more,
        # shorter windows then
        step = float(np.max(np.abs(coef[1] + 2.0 * coef[2] * t))) * (y.size / windows / fs)
        if step <= 0.25 * math.pi or windows >= most:
            break
        windows = min(4 * windows, most)
    resid = phase - v @ coef
    dof = max(windows - 3, 1)
    s_res = math.sqrt(float(resid @ resid) / dof)
    if step > 0.25 * math.pi or s_res > 0.25 * math.pi:
        # neighbouring window phases more than π/4 apart (turning or scattered): unwrapping
        # them by the nearest multiple of 2π can no longer be trusted
        return Measurement.invalid(
            "frequency_drift", "Hz/s", "the phase cannot be followed from window to window "
            f"(frequency changing too fast or too noisy; phase residual {s_res:.2f} rad)",
            value=float(coef[2]) / math.pi, windows=windows)
    m = y.size / windows
    s_th = math.sqrt(2.0 * tone.fit.residual_var / (m * tone.fit.amplitude ** 2))
    sigma = max(s_res, s_th)
    cov = sigma * sigma * np.linalg.inv(v.T @ v)
    value = float(coef[2]) / math.pi
    u = math.sqrt(float(cov[2, 2])) / math.pi
    details = {"windows": windows, "window_s": m / fs, "phase_noise_rad": sigma}
    return Measurement("frequency_drift", value, "Hz/s", expand(u, clock_std(value, capture.clock_ppm)),
                       details=details)
