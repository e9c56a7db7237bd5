"""Following the phase of the fundamental over the capture, and a sine whose frequency drifts.

A fixed-frequency sine fit to a tone whose frequency drifts loses amplitude: over the capture
the tone slides out of phase with the fitted sine, so the fitted amplitude is the average of
a rotating phasor, too small (a 1 % error by a quarter of a bin of sweep, a third by four).
Here the phase of short segments is followed over the capture, a quadratic phase (a linear
frequency drift) is fitted to it, and, when the drift is significant, the amplitude and offset
are fitted again against that chirp (:func:`chirp_fit`). What the quadratic cannot follow
is reported as the phase misfit, so the caller can widen its uncertainty or refuse.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from benchgate.analysis import sinefit
from benchgate.analysis._phasor import pair_dot
from benchgate.analysis.sinefit import Workspace

#: most segments the steady part is cut into at first; each holds at least 2 cycles.
MAX_SEGMENTS = 16
MIN_SEGMENTS = 4
#: most segments when a strong drift needs shorter ones (each still holds at least 2 cycles).
MAX_REFINED_WINDOWS = 1024
#: a quadratic phase term counts as a drift when it exceeds this many standard deviations.
SIGNIFICANT = 3.0


def segment_phases(y: np.ndarray, omega: float, segments: int,
                   work: Workspace | None = None) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Phase (rad, unwrapped), amplitude and centre (samples) of a fixed-ω three-parameter fit per segment.

    The cosine and sine are computed once for the whole capture (or taken from ``work``, set
    at ω, whose own ω is then used throughout); each segment's 3×3 normal equations take
    Σcos², Σsin², Σcos·sin, Σcos and Σsin in closed form (:func:`segment_trig_sums`) and only
    Σy·cos, Σy·sin and Σy from the data: one pass over the capture, or none for the first two
    when the four-parameter fit kept its per-block sums of y in ``work``
    (:meth:`~benchgate.analysis.sinefit.Workspace.segment_sums`; an offset taken out of y
    changes only the constant's coefficient, not the phase).
    """
    n = y.size
    if work is None or work.n != n:
        work = Workspace(n)
        work.set(omega)
    bounds = np.linspace(0, n, segments + 1).round().astype(np.int64)
    starts = bounds[:-1]
    cnt = np.diff(bounds).astype(float)
    cc, ss, cs, c1, s1 = segment_trig_sums(work.omega, bounds, n)
    g = np.empty((segments, 3, 3))
    g[:, 0, 0] = cc
    g[:, 1, 1] = ss
    g[:, 0, 1] = g[:, 1, 0] = cs
    g[:, 0, 2] = g[:, 2, 0] = c1
    g[:, 1, 2] = g[:, 2, 1] = s1
    g[:, 2, 2] = cnt
    r = np.empty((segments, 3))
    kept = work.segment_sums(y, bounds)  # from the fit's own pass over y, when it left them
    if kept is not None:
        sums, offset = kept
        r[:, 0], r[:, 1] = sums.real, sums.imag
        r[:, 2] = np.add.reduceat(y, starts) - offset * cnt  # the same y − offset throughout
    elif segments <= 64:  # matrix–vector products per segment, no temporary the size of y
        pair = work.pair
        for i in range(segments):
            lo, hi = int(bounds[i]), int(bounds[i + 1])
            r[i, :2] = pair_dot(y[lo:hi], pair[lo:hi])
        r[:, 2] = np.add.reduceat(y, starts)
    else:
        r[:, :2] = np.add.reduceat(y[:, None] * work.pair, starts, axis=0)
        r[:, 2] = np.add.reduceat(y, starts)
    p = np.linalg.solve(g, r[..., None])[..., 0]
    phase = np.unwrap(np.arctan2(-p[:, 1], p[:, 0]))
    amp = np.hypot(p[:, 0], p[:, 1])
    centre = starts + (cnt - 1) / 2.0
    return phase, amp, centre


def segment_trig_sums(omega: float, bounds: np.ndarray, n: int) -> tuple[np.ndarray, ...]:
    """Σcos², Σsin², Σcos·sin, Σcos, Σsin of ω·t over each segment ``bounds[i]:bounds[i+1]``
    (t = k − (n−1)/2, as in :class:`~benchgate.analysis.sinefit.Workspace`), in closed form.

    Σ over a segment of L samples centred on m of e^{ixt} is D_L(x)·e^{ix·m} with the Dirichlet
    kernel D_L(x) = sin(Lx/2)/sin(x/2) (geometric series, derived); cos² = (1 + cos 2ωt)/2,
    sin² = (1 − cos 2ωt)/2 and cos·sin = sin(2ωt)/2.
    """
    lo, hi = bounds[:-1].astype(float), bounds[1:].astype(float)
    length = hi - lo
    mid = 0.5 * (lo + hi - 1.0) - 0.5 * (n - 1)

    def phasor_sum(x: float) -> np.ndarray:
        half = math.sin(0.5 * x)
        kernel = length if abs(half) < 1e-12 else np.sin(0.5 * x * length) / half
        return kernel * np.exp(1j * x * mid)

    one, two = phasor_sum(omega), phasor_sum(2.0 * omega)
    return 0.5 * (length + two.real), 0.5 * (length - two.real), 0.5 * two.imag, one.real, one.imag


@dataclass(frozen=True)
class PhaseTrack:
    """Quadratic fit φ(t) = p₀ + p₁t + p₂t² (rad, t in s from the capture's centre) to the phases
    of ``segments`` segments relative to the fitted fixed frequency."""

    coef: np.ndarray  # p0 (rad), p1 (rad/s), p2 (rad/s²)
    cov: np.ndarray  # 3×3 covariance of coef
    segments: int
    segment_s: float
    step: float  # largest phase turn between neighbouring segments (rad)
    residual: float  # rms phase residual about the quadratic (rad)
    noise: float  # phase noise per segment expected from the fit residual (rad)

    @property
    def followed(self) -> bool:
        """Neighbouring segment phases within π/4: unwrapping them can be trusted."""
        return self.step <= 0.25 * math.pi and self.residual <= 0.25 * math.pi

    @property
    def drift(self) -> float:
        """df/dt (Hz/s) = p₂/π."""
        return float(self.coef[2]) / math.pi

    @property
    def significant(self) -> bool:
        """The quadratic phase term is more than :data:`SIGNIFICANT` standard deviations from 0."""
        sd = math.sqrt(max(float(self.cov[2, 2]), 0.0))
        return abs(float(self.coef[2])) > SIGNIFICANT * sd

    @property
    def misfit(self) -> float:
        """Phase scatter about the quadratic beyond what the noise explains (rad, rms)."""
        return math.sqrt(max(self.residual ** 2 - self.noise ** 2, 0.0))


def track_phase(y: np.ndarray, fit: sinefit.SineFit, cycles: float, sample_rate: float,
                work: Workspace | None = None) -> PhaseTrack | None:
    """Follow the phase of the fundamental over ``y``; None with fewer than 8 cycles.

    Notes
    -----
    The capture is cut into 4 to 16 equal segments (more, up to 1024, when the phase turns by
    more than π/4 between neighbouring segments); a three-parameter fit at the fitted frequency
    gives each segment's phase; a least-squares quadratic in time gives the drift. The phase
    noise is the larger of the regression residual and the Cramér–Rao phase term
    √(2σ²/(M·A²)) per segment of M samples.

    References
    ----------
    IEEE Std 1057-2017 (three-parameter fit); S. M. Kay, Fundamentals of Statistical Signal
    Processing, Vol. I, 1993 (phase variance); linear least squares with its covariance.
    """
    segments = min(MAX_SEGMENTS, int(cycles // 2))
    if segments < MIN_SEGMENTS or not fit.amplitude > 0:
        return None
    fs = sample_rate
    most = min(MAX_REFINED_WINDOWS, int(cycles // 2))
    while True:
        try:
            phase, _, centre = segment_phases(y, fit.omega, segments, work)
        except np.linalg.LinAlgError:
            # a segment's [cos, sin, 1] columns are dependent (the fitted ω turns too little
            # within a segment): no phase to follow, so nothing built on it can be trusted
            nan3 = np.full(3, math.nan)
            return PhaseTrack(nan3, np.full((3, 3), math.nan), segments, y.size / segments / sample_rate,
                              math.inf, math.inf, math.nan)
        t = (centre - (y.size - 1) / 2.0) / fs
        v = np.stack([np.ones_like(t), t, t * t], axis=1)
        coef, *_ = np.linalg.lstsq(v, phase, rcond=None)
        # a strong drift turns the phase by more than π/4 between neighbouring segments, where
        # unwrapping becomes ambiguous (and the fixed-ω fit of each segment smears): use more,
        # shorter segments then
        step = float(np.max(np.abs(coef[1] + 2.0 * coef[2] * t))) * (y.size / segments / fs)
        if step <= 0.25 * math.pi or segments >= most:
            break
        segments = min(4 * segments, most)
    resid = phase - v @ coef
    s_res = math.sqrt(float(resid @ resid) / max(segments - 3, 1))
    m = y.size / segments
    s_th = math.sqrt(2.0 * fit.residual_var / (m * fit.amplitude ** 2))
    sigma = max(s_res, s_th)
    cov = sigma * sigma * np.linalg.inv(v.T @ v)
    return PhaseTrack(coef, cov, segments, m / fs, step, s_res, s_th)


@dataclass(frozen=True)
class ChirpFit:
    """Amplitude and offset of the fundamental fitted along its tracked (drifting) phase."""

    amplitude: float  # V peak
    offset: float  # V
    residual_var: float  # V², RSS/(N − 6)
    n: int
    residual: np.ndarray  # y minus the fitted chirp


def chirp_fit(y: np.ndarray, fit: sinefit.SineFit, track: PhaseTrack, sample_rate: float,
              start: int = 0) -> ChirpFit:
    """Three-parameter least squares of ``y[start:]`` on [cos θ, sin θ, 1] with
    θ(t) = ω·t + p₁τ + p₂τ² (t in samples, τ = t/fs in s, both from the centre of ``y``), the
    tracked phase.

    References
    ----------
    IEEE Std 1057-2017 (three-parameter fit, here along a known phase instead of a known
    frequency).
    """
    y = np.asarray(y, dtype=float)
    n = y.size
    t = np.arange(start, n) - (n - 1) / 2.0
    tau = t / sample_rate
    theta = fit.omega * t + float(track.coef[1]) * tau + float(track.coef[2]) * tau * tau
    cols = np.stack([np.cos(theta), np.sin(theta), np.ones(t.size)], axis=1)
    part = y[start:]
    coef, *_ = np.linalg.lstsq(cols, part, rcond=None)
    resid = part - cols @ coef
    return ChirpFit(float(math.hypot(coef[0], coef[1])), float(coef[2]),
                    float(resid @ resid) / max(t.size - 6, 1), t.size, resid)
