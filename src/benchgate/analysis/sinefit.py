"""IEEE 1057 sine fits: three-parameter (frequency known) and four-parameter (frequency fitted).

The model is ``y[n] ≈ A·cos(ω·t_n) + B·sin(ω·t_n) + C`` with t_n in samples measured from the
middle of the capture (which keeps the normal equations well conditioned). The fits work on
the 4×4 normal equations (one matrix product over the capture per iteration), never on
repeated large least-squares problems.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from benchgate.analysis._phasor import (  # noqa: F401  (re-exported: the fits' workspace)
    Workspace,
    _dirichlet,
    _dirichlet_derivatives,
    _trig_sums,
    phasor,
)


@dataclass(frozen=True)
class SineFit:
    """Result of a sine fit.

    ``omega`` is in radians per sample; ``amplitude`` is the peak amplitude √(A²+B²);
    ``phase`` the phase of the cosine at the first sample; ``residual_var`` the residual
    variance RSS/(N − p) (p = 3 or 4 fitted parameters).
    """

    omega: float
    a: float
    b: float
    offset: float
    residual_var: float
    n: int
    iterations: int
    converged: bool

    @property
    def amplitude(self) -> float:
        return math.hypot(self.a, self.b)

    @property
    def cycles_per_sample(self) -> float:
        return self.omega / (2.0 * math.pi)

    @property
    def phase(self) -> float:
        """Phase φ (rad) of A·cos(ω n + φ) with n = 0 at the first sample."""
        centre = (self.n - 1) / 2.0
        return float(math.remainder(math.atan2(-self.b, self.a) - self.omega * centre, 2.0 * math.pi))

    @property
    def snr(self) -> float:
        """η = A²/(2σ²) from the fit (linear); inf when the residual is zero."""
        if self.residual_var <= 0:
            return math.inf
        return self.amplitude ** 2 / (2.0 * self.residual_var)


def dot(a: np.ndarray, b: np.ndarray) -> float:
    """Inner product without BLAS threads (predictable on a busy machine)."""
    return float(np.einsum("i,i->", a, b))


def fit3(y: np.ndarray, omega: float, *, exact_rss: bool = True) -> SineFit:
    """Three-parameter sine fit at a known angular frequency.

    Parameters
    ----------
    y : numpy.ndarray
        Samples (V), at least 4.
    omega : float
        Angular frequency in radians per sample (0 < ω < π).
    exact_rss : bool
        False: the residual variance from the normal equations (y·y − p·r, y centred), with no
        pass over the residual; exact to rounding of y·y, i.e. for any residual above about
        1e-12 of the signal power.

    Returns
    -------
    SineFit

    References
    ----------
    IEEE Std 1057-2017, three-parameter least-squares sine fit; IEEE Std 1241-2010.
    """
    if not exact_rss:
        y = np.asarray(y, dtype=float)
        n = y.size
        mean, sy, yy = _level_sums(y)
        w = Workspace(n)
        w.set(omega)
        yc, ys = w.project(y)
        shift = mean * _dirichlet(float(omega), n)  # Σ mean·cos ωt; Σ mean·sin ωt = 0 (t symmetric)
        cc, s2, cs, sc, ss = w.sums()
        gram = np.array([[cc, cs, sc], [cs, s2, ss], [sc, ss, float(n)]])
        r = np.array([yc - shift, ys, sy])
        p = _lstsq_small(gram, r)
        rss = max(yy - float(p @ r), 0.0)
        return SineFit(omega=float(omega), a=float(p[0]), b=float(p[1]), offset=float(p[2]) + mean,
                       residual_var=rss / max(n - 3, 1), n=n, iterations=0, converged=True)
    y, mean = _centred(y)
    n = y.size
    w = Workspace(n)
    w.set(omega)
    a, b, c, rss = _solve3(y, w, exact_rss=exact_rss)
    return SineFit(omega=float(omega), a=a, b=b, offset=c + mean, residual_var=max(rss, 0.0) / max(n - 3, 1),
                   n=n, iterations=0, converged=True)


#: samples taken at a time by :func:`_level_sums` (its temporaries stay in the cache).
_LEVEL_CHUNK = 65536


def _level_sums(y: np.ndarray) -> tuple[float, float, float]:
    """The mean of y, Σ(y − mean) (zero up to rounding) and Σ(y − mean)², the deviations formed
    a chunk at a time (no array the size of y)."""
    mean = float(y.mean()) if y.size else 0.0
    sy = yy = 0.0
    for first in range(0, y.size, _LEVEL_CHUNK):
        d = y[first:first + _LEVEL_CHUNK] - mean
        sy += float(d.sum())
        yy += dot(d, d)
    return mean, sy, yy


def _centred(y: np.ndarray) -> tuple[np.ndarray, float]:
    """y minus its mean (so sums of squares do not cancel under a large DC offset), and the mean."""
    y = np.asarray(y, dtype=float)
    mean = float(y.mean()) if y.size else 0.0
    return y - mean, mean


def _solve3(y: np.ndarray, w: Workspace, *, exact_rss: bool = True,
            proj: tuple[float, float] | None = None) -> tuple[float, float, float, float]:
    """Three-parameter least squares; with ``exact_rss=False`` the residual sum of squares comes
    from the normal equations (y·y − p·r; fine for a centred capture). ``proj`` is
    ``w.project(y)`` when the caller has it already."""
    cc, s2, cs, sc, ss = w.sums()
    g = np.array([[cc, cs, sc], [cs, s2, ss], [sc, ss, float(y.size)]])
    yc, ys = w.project(y) if proj is None else proj
    r = np.array([yc, ys, float(y.sum())])
    p = _lstsq_small(g, r)
    if not exact_rss:
        return float(p[0]), float(p[1]), float(p[2]), max(dot(y, y) - float(p @ r), 0.0)
    resid = w.tmp
    np.multiply(w.c, -p[0], out=resid)
    resid += y
    resid -= p[1] * w.s
    resid -= p[2]
    return float(p[0]), float(p[1]), float(p[2]), dot(resid, resid)


def residual(y: np.ndarray, fit: SineFit) -> np.ndarray:
    """y minus the fitted sine (same centred time origin as the fit)."""
    y = np.asarray(y, dtype=float)
    w = Workspace(y.size)
    w.set(fit.omega)
    resid = np.multiply(w.c, -fit.a)
    resid += y
    resid -= fit.b * w.s
    resid -= fit.offset
    return resid


def _lstsq_small(g: np.ndarray, r: np.ndarray) -> np.ndarray:
    try:
        return np.linalg.solve(g, r)
    except np.linalg.LinAlgError:
        return np.linalg.lstsq(g, r, rcond=None)[0]


def fit4(y: np.ndarray, omega0: float, *, max_iter: int = 30, work: Workspace | None = None) -> SineFit:
    """Four-parameter sine fit (Gauss–Newton on [A, B, C, Δω]) from a starting frequency.

    Parameters
    ----------
    y : numpy.ndarray
        Samples (V), at least 5.
    omega0 : float
        Starting angular frequency in radians per sample, within a fraction of a DFT bin
        (2π/N) of the answer (the interpolated DFT peak is good enough).
    max_iter : int
        Iteration cap.
    work : Workspace, optional
        Buffers to use; afterwards they hold cos/sin at (within a step below the noise of)
        the fitted frequency, for callers that need them again.

    Returns
    -------
    SineFit
        ``converged`` is False when the step did not fall below 1 % of its standard
        deviation within ``max_iter`` iterations.

    Notes
    -----
    Each step is limited to a quarter of a DFT bin. Iteration stops when the frequency
    step is below 1 % of its own standard deviation (from the normal equations and the
    current residual) — a fixed tolerance in cycles per sample would be either too loose
    for long captures or unreachable for short noisy ones.

    References
    ----------
    IEEE Std 1057-2017, four-parameter sine fit; P. Händel, "Properties of the IEEE-STD-1057
    four-parameter sine wave fit algorithm", IEEE Trans. Instrum. Meas. 49(6), 2000.
    """
    y = np.asarray(y, dtype=float)
    n = y.size
    w = Workspace(n) if work is None or work.n != n else work
    mean, sy, yy = _level_sums(y)

    def at(omega: float) -> tuple[complex, complex]:
        # Σ (y − mean)·e^{iωt} and Σ t·(y − mean)·e^{iωt}: one pass over y itself, the mean's
        # share in closed form (Σ e^{iωt} = D(ω), Σ t·e^{iωt} = i·Σ t·sin ωt; t symmetric)
        w.set(omega)
        p, q = w.project_with_t(y, keep=0.0)
        return p - mean * _dirichlet(omega, n), q - 1j * mean * _dirichlet_derivatives(omega, n)[0]

    g = gauss_newton(at, n, sy, yy, omega0, max_iter=max_iter)
    if g.converged:
        return SineFit(omega=g.omega, a=g.a, b=g.b, offset=g.c + mean, residual_var=g.rss / max(n - 4, 1),
                       n=n, iterations=g.iterations, converged=True)
    y = y - mean
    a, b, c, rss = _solve3(y, w, proj=(g.p.real, g.p.imag))  # the exact residual of the last step
    return SineFit(omega=g.omega, a=a, b=b, offset=c + mean, residual_var=max(rss, 0.0) / max(n - 4, 1),
                   n=n, iterations=g.iterations, converged=False)


@dataclass(frozen=True)
class GaussNewton:
    """Where :func:`gauss_newton` stopped: ω, the linear parameters, the residual sum of squares
    from the normal equations, and Σy·e^{iωt} at the last ω evaluated."""

    omega: float
    a: float
    b: float
    c: float
    rss: float
    iterations: int
    converged: bool
    p: complex


def gauss_newton(at, n: int, sy: float, yy: float, omega0: float, *, max_iter: int = 30) -> GaussNewton:
    """The four-parameter fit's iteration on its normal equations, given the data only through
    ``at(ω) -> (Σ y·e^{iωt}, Σ t·y·e^{iωt})`` (y centred, t centred, n samples), Σy and Σy².

    Shared by :func:`fit4` (one pass over the capture per ``at``) and the growing capture's fit
    (:mod:`benchgate.analysis._growing`, sums kept from earlier looks), so both take the same
    steps. See :func:`fit4` for the stopping rule.
    """
    omega = float(omega0)
    max_step = 0.25 * 2.0 * math.pi / n
    pz, tz = at(omega)
    cc, s2, cs, sc, ss = _trig_sums(omega, n)
    g3 = np.array([[cc, cs, sc], [cs, s2, ss], [sc, ss, float(n)]])
    a, b, c = (float(v) for v in _lstsq_small(g3, np.array([pz.real, pz.imag, sy])))
    it = 0
    t2 = n * (n * n - 1.0) / 12.0  # Σ t²
    rss_lin = math.nan
    for it in range(1, max_iter + 1):
        # Gauss–Newton column for ω: d = t·(b·cos − a·sin). Its products with cos, sin, 1 and
        # itself are trigonometric sums with closed forms (Σ t·cos² = Σ t·sin² = Σ t·cos = 0 by
        # symmetry; the rest from the Dirichlet kernel's derivatives), so the data enter each
        # step only through Σ y·e^{iωt} and Σ t·y·e^{iωt}.
        cc, s2, cs, sc, ss = _trig_sums(omega, n)
        s1_2w, c2_2w = _dirichlet_derivatives(2.0 * omega, n)
        s1_w, _ = _dirichlet_derivatives(omega, n)
        g = np.empty((4, 4))
        g[0, 0], g[1, 1], g[0, 1], g[0, 3], g[1, 3] = cc, s2, cs, sc, ss
        g[1, 0], g[3, 0], g[3, 1] = cs, sc, ss
        g[0, 2] = g[2, 0] = -0.5 * a * s1_2w  # Σ cos·d
        g[1, 2] = g[2, 1] = 0.5 * b * s1_2w  # Σ sin·d
        g[2, 2] = 0.5 * (b * b + a * a) * t2 + 0.5 * (b * b - a * a) * c2_2w  # Σ d²
        g[2, 3] = g[3, 2] = -a * s1_w  # Σ d
        g[3, 3] = n
        r = np.array([pz.real, pz.imag, b * tz.real - a * tz.imag, sy])
        p = _lstsq_small(g, r)
        a, b, dw, c = (float(v) for v in p)
        rss_lin = max(yy - float(p @ r), 0.0)
        try:
            var_dw = rss_lin / max(n - 4, 1) * float(np.linalg.inv(g)[2, 2])
        except np.linalg.LinAlgError:
            var_dw = math.inf
        if dw * dw <= 1e-4 * max(var_dw, 0.0) or abs(dw) < 1e-15 * omega:
            # the step is far below its own noise: keep this solution; its residual sum of
            # squares follows from the normal equations without another pass over the data
            omega = min(max(omega + dw, 1e-12), math.pi - 1e-12)
            return GaussNewton(omega, a, b, c, rss_lin, it, True, pz)
        dw = float(np.clip(dw, -max_step, max_step))
        omega = min(max(omega + dw, 1e-12), math.pi - 1e-12)
        pz, tz = at(omega)
    return GaussNewton(omega, a, b, c, rss_lin, it, False, pz)


def best_start(y: np.ndarray, omega0: float, *, span_bins: float = 1.0, points: int = 21) -> float:
    """Refine a starting frequency by the smallest three-parameter residual on a small grid.

    For short captures, where the negative-frequency image biases the DFT peak, this puts the
    four-parameter fit inside its region of convergence. Cost: ``points`` three-parameter fits.
    """
    y, _ = _centred(y)
    n = y.size
    bins = 2.0 * math.pi / n
    grid = omega0 + np.linspace(-span_bins, span_bins, points) * bins
    grid = grid[(grid > 0.2 * bins) & (grid < math.pi - 0.2 * bins)]
    if grid.size == 0:
        return omega0
    best, best_rss = omega0, math.inf
    work = Workspace(n)
    for omega in grid:
        work.set(float(omega))
        rss = _solve3(y, work)[3]
        if rss < best_rss:
            best, best_rss = float(omega), rss
    return best
