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


class Workspace:
    """exp(i·ω·t) over one capture (t centred, in samples), as a block product.

    The phasor at sample k = b·L + l is zo[b]·zi[l]: √n outer angles times √n inner angles,
    a few multiplies per sample instead of a cosine and a sine, in full double precision.
    :meth:`project` uses that product directly: Σv·e^{iωt} = Σ_b zo[b]·(Σ_l v[b·L + l]·zi[l]),
    one matrix product over the data (numpy.matmul) and no array of the capture's length, so a
    fit step costs one pass over the data per projected vector. The full ``z`` (and its real
    and imaginary parts ``c`` and ``s``) is built only when asked for, into a buffer allocated
    once.
    """

    #: most multiply–adds per matrix product call: OpenBLAS runs smaller products on one thread
    #: (m·n·k below 65536·4), which keeps the cost predictable on a busy machine.
    _CHUNK_MACS = 131072

    def __init__(self, n: int):
        self.n = n
        self.block = max(1, int(math.isqrt(n)))
        self.nblocks = -(-n // self.block)
        self._z: np.ndarray | None = None
        self._z_omega = math.nan
        self._tmp: np.ndarray | None = None
        self.centre = (n - 1) / 2.0
        self.omega = math.nan
        self._zo = np.zeros(0, dtype=complex)
        self._zi_pair = np.zeros((0, 2))
        self._zi_quad = np.zeros((0, 4))

    def set(self, omega: float) -> None:
        """Move to angular frequency ``omega`` (rad/sample); costs O(√n)."""
        self.omega = float(omega)
        self._zo = np.exp(1j * self.omega * (np.arange(self.nblocks) * self.block - self.centre))
        zi = np.exp(1j * self.omega * np.arange(self.block))
        self._zi_pair = np.ascontiguousarray(zi.view(np.float64).reshape(self.block, 2))
        self._zi_quad = np.empty((self.block, 4))  # e^{iωl} and l·e^{iωl}, as (re, im) pairs
        self._zi_quad[:, :2] = self._zi_pair
        np.multiply(self._zi_pair, np.arange(self.block, dtype=float)[:, None], out=self._zi_quad[:, 2:])

    @property
    def z(self) -> np.ndarray:
        """exp(i·ω·t) over the capture (complex; built on first use after :meth:`set`)."""
        if self._z is None:
            self._z = np.empty(self.nblocks * self.block, dtype=complex)
        if self._z_omega != self.omega:
            zi = self._zi_pair[:, 0] + 1j * self._zi_pair[:, 1]
            np.multiply.outer(self._zo, zi, out=self._z.reshape(self.nblocks, self.block))
            self._z_omega = self.omega
        return self._z[:self.n]

    @property
    def pair(self) -> np.ndarray:
        """(n, 2) view of ``z``: columns cos(ω·t), sin(ω·t)."""
        return self.z.view(np.float64).reshape(self.n, 2)

    @property
    def c(self) -> np.ndarray:
        """cos(ω·t) (a strided view of ``z``)."""
        return self.z.real

    @property
    def s(self) -> np.ndarray:
        """sin(ω·t) (a strided view of ``z``)."""
        return self.z.imag

    @property
    def tmp(self) -> np.ndarray:
        """A scratch buffer of n samples."""
        if self._tmp is None:
            self._tmp = np.empty(self.n)
        return self._tmp

    def project(self, v: np.ndarray, *, keep: float | None = None) -> tuple[float, float]:
        """(Σ v·cos ωt, Σ v·sin ωt) at the current ω, without building ``z``.

        With ``keep`` (the offset already taken out of ``v``, i.e. v = y − keep), the per-block
        sums Σ_l v[b·L + l]·e^{iω(b·L + l − centre)} are kept for :meth:`segment_sums`.
        """
        total, _ = self._projections(v, keep, with_t=False)
        return total.real, total.imag

    def project_with_t(self, v: np.ndarray, *, keep: float | None = None) -> tuple[complex, complex]:
        """Σ v·e^{iωt} and Σ t·v·e^{iωt} in one pass: with k = b·L + l,
        t = (b·L − centre) + l, so each block needs Σ_l v·e^{iωl} and Σ_l l·v·e^{iωl}, one
        matrix product with four columns. ``keep`` as for :meth:`project`."""
        return self._projections(v, keep, with_t=True)

    def _projections(self, v: np.ndarray, keep: float | None, *, with_t: bool) -> tuple[complex, complex]:
        width = self.block
        full = self.n // width
        head = v[:full * width].reshape(full, width)
        zi = self._zi_quad if with_t else self._zi_pair
        cols = zi.shape[1]
        rows = max(1, self._CHUNK_MACS // (cols * width))
        part = np.empty((self.nblocks, cols))
        for i in range(0, full, rows):
            np.matmul(head[i:i + rows], zi, out=part[i:min(i + rows, full)])
        rest = v[full * width:]
        if rest.size:
            part[full] = np.dot(rest, zi[:rest.size])
        blocks = self._zo * (part[:, 0] + 1j * part[:, 1])
        total = complex(np.sum(blocks))
        if keep is not None:
            self._kept = (self.omega, float(keep), blocks)
        if not with_t:
            return total, 0j
        offsets = np.arange(self.nblocks) * float(width) - self.centre  # b·L − centre
        local = self._zo * (part[:, 2] + 1j * part[:, 3])
        return total, complex(np.dot(offsets, blocks) + np.sum(local))

    def segment_sums(self, y: np.ndarray, bounds: np.ndarray) -> tuple[np.ndarray, float] | None:
        """Σ (y − offset)·e^{iωt} over each segment ``bounds[i]:bounds[i+1]`` from the block sums
        kept by the last :meth:`project` with ``keep`` at the current ω (the whole blocks inside
        a segment from a running sum, its ragged ends directly), and that offset; None when no
        such sums are kept. ``y`` must be the capture that was projected."""
        kept = getattr(self, "_kept", None)
        if kept is None or kept[0] != self.omega:
            return None
        _, offset, blocks = kept
        width = self.block
        run = np.concatenate(([0.0 + 0.0j], np.cumsum(blocks)))
        out = np.empty(bounds.size - 1, dtype=complex)
        for i in range(bounds.size - 1):
            lo, hi = int(bounds[i]), int(bounds[i + 1])
            first, last = -(-lo // width), hi // width  # whole blocks first … last − 1
            if first >= last:
                out[i] = self._direct(y, offset, lo, hi)
                continue
            total = run[last] - run[first]
            if lo < first * width:
                total += self._direct(y, offset, lo, first * width)
            if hi > last * width:
                total += self._direct(y, offset, last * width, hi)
            out[i] = total
        return out, offset

    def _direct(self, y: np.ndarray, offset: float, lo: int, hi: int) -> complex:
        """Σ (y − offset)·e^{iωt} over samples lo … hi−1, one matrix–vector product per block."""
        width = self.block
        total = 0j
        while lo < hi:
            b = lo // width
            end = min(hi, (b + 1) * width)
            r = np.dot(y[lo:end] - offset, self._zi_pair[lo - b * width:end - b * width])
            total += self._zo[b] * complex(r[0], r[1])
            lo = end
        return total

    def sums(self) -> tuple[float, float, float, float, float]:
        """Σcos², Σsin², Σcos·sin, Σcos, Σsin over the capture, in closed form.

        With t symmetric about 0, Σsin = Σcos·sin = 0 and, by the Dirichlet kernel
        D(x) = Σcos(x·t) = sin(n·x/2)/sin(x/2): Σcos = D(ω), Σcos² = (n + D(2ω))/2,
        Σsin² = (n − D(2ω))/2 (derived). Saves five passes over the data per fit step.
        """
        return _trig_sums(self.omega, self.n)


def phasor(omega: float, n: int) -> np.ndarray:
    """exp(i·ω·t) for t = 0 … n−1 minus (n−1)/2 (complex; for small captures and tests)."""
    if n <= 0:
        return np.zeros(0, dtype=complex)
    w = Workspace(n)
    w.set(omega)
    return w.z.copy()


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
    y, mean = _centred(y)
    n = y.size
    w = Workspace(n)
    w.set(omega)
    a, b, c, rss = _solve3(y, w, exact_rss=exact_rss)
    return SineFit(omega=float(omega), a=a, b=b, offset=c + mean, residual_var=max(rss, 0.0) / max(n - 3, 1),
                   n=n, iterations=0, converged=True)


def _centred(y: np.ndarray) -> tuple[np.ndarray, float]:
    """y minus its mean (so sums of squares do not cancel under a large DC offset), and the mean."""
    y = np.asarray(y, dtype=float)
    mean = float(y.mean()) if y.size else 0.0
    return y - mean, mean


def _dirichlet(x: float, n: int) -> float:
    """Σ cos(x·t) over t = −(n−1)/2 … (n−1)/2."""
    half = math.sin(0.5 * x)
    if abs(half) < 1e-12:
        return float(n)
    return math.sin(0.5 * n * x) / half


def _dirichlet_derivatives(x: float, n: int) -> tuple[float, float]:
    """S1(x) = Σ t·sin(x·t) and C2(x) = Σ t²·cos(x·t) over t = −(n−1)/2 … (n−1)/2, in closed
    form: S1 = −D'(x), C2 = −D''(x) for the Dirichlet kernel D(x) = sin(n·x/2)/sin(x/2)
    (derived by differentiating it; checked against the sums in tests/analysis)."""
    u = 0.5 * x
    su = math.sin(u)
    if abs(su) < 1e-9:  # x at a multiple of 2π: the sums by direct evaluation (tiny captures only)
        t = np.arange(n) - (n - 1) / 2.0
        return float(np.sum(t * np.sin(x * t))), float(np.sum(t * t * np.cos(x * t)))
    big_n = math.sin(n * u)
    d1 = (n * math.cos(n * u) * su - big_n * math.cos(u)) / (su * su)  # dD/du
    d2 = big_n * (1.0 - n * n) / su - 2.0 * math.cos(u) / su * d1  # d²D/du²
    return -0.5 * d1, -0.25 * d2


def _trig_sums(omega: float, n: int) -> tuple[float, float, float, float, float]:
    d2 = _dirichlet(2.0 * omega, n)
    return 0.5 * (n + d2), 0.5 * (n - d2), 0.0, _dirichlet(omega, n), 0.0


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
    y, mean = _centred(y)
    n = y.size
    w = Workspace(n) if work is None or work.n != n else work
    omega = float(omega0)
    max_step = 0.25 * 2.0 * math.pi / n
    w.set(omega)
    pz, tz = w.project_with_t(y, keep=mean)  # Σ y·e^{iωt} and Σ t·y·e^{iωt}
    proj = (pz.real, pz.imag)
    sy = float(y.sum())
    a, b, c, _ = _solve3(y, w, exact_rss=False, proj=proj)
    converged = False
    it = 0
    yy = dot(y, y)
    t2 = n * (n * n - 1.0) / 12.0  # Σ t²
    for it in range(1, max_iter + 1):
        # Gauss–Newton column for ω: d = t·(b·cos − a·sin). Its products with cos, sin, 1 and
        # itself are trigonometric sums with closed forms (Σ t·cos² = Σ t·sin² = Σ t·cos = 0 by
        # symmetry; the rest from the Dirichlet kernel's derivatives), so each step takes one
        # pass over the capture (Σ y·e^{iωt} and Σ t·y·e^{iωt} together).
        cc, s2, cs, sc, ss = w.sums()
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
        r = np.array([proj[0], proj[1], b * tz.real - a * tz.imag, sy])
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
            return SineFit(omega=omega, a=a, b=b, offset=c + mean, residual_var=rss_lin / max(n - 4, 1),
                           n=n, iterations=it, converged=True)
        dw = float(np.clip(dw, -max_step, max_step))
        omega = min(max(omega + dw, 1e-12), math.pi - 1e-12)
        w.set(omega)
        pz, tz = w.project_with_t(y, keep=mean)
        proj = (pz.real, pz.imag)
    a, b, c, rss = _solve3(y, w, proj=proj)
    return SineFit(omega=omega, a=a, b=b, offset=c + mean, residual_var=max(rss, 0.0) / max(n - 4, 1),
                   n=n, iterations=it, converged=converged)


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
