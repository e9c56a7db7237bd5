"""The four-parameter sine fit of a growing capture from sums kept over earlier looks.

An adaptive capture step re-measures its capture after every block (``runner/adaptive.py``).
The IEEE 1057 fit sees the data only through Σ(y − ȳ)·e^{iωt}, Σ t·(y − ȳ)·e^{iωt}, Σ(y − ȳ) and
Σ(y − ȳ)² (:func:`benchgate.analysis.sinefit.gauss_newton`; the rest of its normal equations is
in closed form). At one frequency those sums are additive over blocks of samples, so
:class:`GrowingFit` keeps, per block of :data:`BLOCK` samples (counted from the first sample of
the capture), the moments M_j = Σ (x − r)·v^j·e^{iω₀u} (u the sample's offset from the block's
centre, v = u/(BLOCK/2), j = 0 … :data:`ORDER`, r a fixed reference level) at a reference
frequency ω₀, plus Σ(x − r) and Σ(x − r)². A grown capture costs sums over its new blocks only.

At another frequency ω = ω₀ + δ each block's sums follow from its moments by the Taylor series
e^{iδu} = Σ_j (iδu)^j / j!; with ρ = |δ|·BLOCK/2 ≤ :data:`RADIUS` = 0.1 the terms left out are
below ρ^ORDER/ORDER! ≈ 3e-19 of the block's Σ|x − r| (derived: remainder of the exponential
series, |u| ≤ BLOCK/2). Beyond that radius, i.e. when the frequency moves by more than
2·RADIUS/(2π·BLOCK) ≈ 3.1e-5 cycles per sample (1.55 Hz at 50 kHz; 0.78 of the DFT bin of a
25 000-sample capture), every kept block is summed again at the new frequency (a full pass, as a
fit from scratch would make). The ragged ends of the fitted part (the steady part's first sample and the
capture's last need not fall on a block edge) are summed directly.

The fit then takes exactly the steps of :func:`~benchgate.analysis.sinefit.fit4` on the same
samples (the same iteration on sums equal to rounding), so its result equals the fit from
scratch; tests/analysis/test_growing.py checks it to 1e-9 of the Cramér–Rao σ.

Not reused (and why): the capture's validation, envelope and steady part (its reference is the
last quarter of the capture, which moves as it grows, and the 90 % crossing is read from it),
the tapered spectrum behind the coarse frequency and the distortion figures (the taper spans the
whole capture, so no bin of a grown capture is a sum of earlier bins), the phase track (its
segments are fractions of the capture) and the residual-based noise floor: all are computed
afresh at every look. A non-converged fit, which no measurement trusts, takes its residual from
the normal equations here instead of a pass over the residual.

References
----------
IEEE Std 1057-2017, four-parameter sine fit (normal equations); P. Händel, IEEE Trans. Instrum.
Meas. 49(6), 2000. Taylor remainder of e^x: handbook formula.
"""

from __future__ import annotations

import math

import numpy as np

from benchgate.analysis._phasor import CHUNK_MACS
from benchgate.analysis.sinefit import (
    SineFit,
    _dirichlet,
    _dirichlet_derivatives,
    _lstsq_small,
    _trig_sums,
    gauss_newton,
)

#: samples per kept block.
BLOCK = 1024
#: highest moment kept per block (the fit's t-weighted sum uses one order less).
ORDER = 11
#: largest |δ|·BLOCK/2 (rad) a frequency may lie from the kept one before the blocks are summed
#: again: the Taylor terms left out are then below RADIUS^ORDER/ORDER! ≈ 3e-19 relative.
RADIUS = 0.1
#: shortest longest-look (samples) for which keeping sums pays: below it the kept path's fixed
#: cost (the prefix check, new blocks' moments, a few dozen small array operations) exceeds the
#: passes a fit from scratch makes (bench/bench_speed.py: per look at 10⁵ samples 0.90× as fast,
#: at 10⁶ 1.02×, at 4·10⁶ 1.04×), so the runner keeps sums only for captures this long.
WORTH_SAMPLES = 1_000_000


class KeptSums:
    """What :func:`benchgate.analysis._track.segment_phases` asks of a workspace (``n``,
    ``omega`` and ``segment_sums``), from a :class:`GrowingFit` after its fit: the phase track
    then needs no pass over the capture either."""

    def __init__(self, fit: GrowingFit, n: int):
        self.n = n
        self.omega = fit.evaluated
        self._fit = fit

    def segment_sums(self, y: np.ndarray, bounds: np.ndarray) -> tuple[np.ndarray, float] | None:
        return self._fit.segment_sums(bounds)


class GrowingFit:
    """Sums of one growing capture for the four-parameter fit (see the module docstring).

    Feed it the grown capture at each look with :meth:`fit4`; a capture that is not an
    extension of the one seen before (checked sample by sample against the previous look's
    array) starts it afresh.
    """

    def __init__(self) -> None:
        self._seen: np.ndarray | None = None  # samples of the previous look
        self.reference = 0.0  # r
        self.omega = math.nan  # ω₀ of the kept moments
        self._moments = np.zeros((0, ORDER + 1), dtype=complex)
        self._sum = np.zeros(0)  # Σ(x − r) per block
        self._sum2 = np.zeros(0)  # Σ(x − r)² per block
        self.rebuilds = 0  # full passes made (for the benchmark and tests)
        self.blocks_added = 0
        self.evaluated = math.nan  # the last ω the sums were taken at (where fit4 leaves its workspace)

    # -- keeping the sums ------------------------------------------------------------------
    def _follow(self, x: np.ndarray) -> None:
        """Take the grown capture ``x``: add sums for its new whole blocks."""
        prev = self._seen
        if prev is None or prev.size > x.size or not np.array_equal(prev, x[:prev.size]):
            self.reference = float(x[: min(x.size, BLOCK)].mean()) if x.size else 0.0
            self.omega = math.nan
            self._moments = np.zeros((0, ORDER + 1), dtype=complex)
            self._sum = np.zeros(0)
            self._sum2 = np.zeros(0)
        self._seen = x
        done = self._sum.size
        full = x.size // BLOCK
        if full > done:
            centred = x[done * BLOCK:full * BLOCK] - self.reference
            rows = centred.reshape(-1, BLOCK)
            self._sum = np.concatenate((self._sum, rows.sum(axis=1)))
            self._sum2 = np.concatenate((self._sum2, np.einsum("ij,ij->i", rows, rows)))
            if math.isfinite(self.omega):
                self._moments = np.concatenate((self._moments, self._block_moments(rows, self.omega)))
            self.blocks_added += full - done

    def _block_moments(self, rows: np.ndarray, omega: float) -> np.ndarray:
        """M_j = Σ (x − r)·v^j·e^{iωu} for each row (one block) of ``rows`` (x − r)."""
        u = np.arange(BLOCK) - (BLOCK - 1) / 2.0
        basis = np.empty((ORDER + 1, BLOCK), dtype=complex)
        basis[0] = np.exp(1j * omega * u)
        v = u / (BLOCK / 2.0)
        for j in range(1, ORDER + 1):
            basis[j] = basis[j - 1] * v
        re, im = np.ascontiguousarray(basis.real.T), np.ascontiguousarray(basis.imag.T)
        out = np.empty((rows.shape[0], ORDER + 1), dtype=complex)
        step = max(1, CHUNK_MACS // (BLOCK * (ORDER + 1)))  # small products: one BLAS thread
        for i in range(0, rows.shape[0], step):
            part = rows[i:i + step]
            out[i:i + step] = part @ re + 1j * (part @ im)
        return out

    def _recentre(self, x: np.ndarray, omega: float) -> None:
        full = self._sum.size
        rows = (x[: full * BLOCK] - self.reference).reshape(-1, BLOCK)
        self._moments = self._block_moments(rows, omega)
        self.omega = float(omega)
        self.rebuilds += 1

    # -- the sums at a frequency -------------------------------------------------------------
    def _at(self, x: np.ndarray, start: int, mean: float, omega: float) -> tuple[complex, complex]:
        """Σ(y − mean)·e^{iωt} and Σ t·(y − mean)·e^{iωt} for y = x[start:], t centred on y."""
        n = x.size - start
        self.evaluated = float(omega)
        if not (math.isfinite(self.omega) and abs(omega - self.omega) * BLOCK / 2.0 <= RADIUS):
            self._recentre(x, omega)
        centre = start + (n - 1) / 2.0  # t = k − centre, k the sample index in x
        first = -(-start // BLOCK)
        last = min(x.size // BLOCK, self._sum.size)
        p = q = 0j
        if first < last:
            delta = (omega - self.omega) * (BLOCK / 2.0)
            series = (1j * delta) ** np.arange(ORDER + 1) / np.array([math.factorial(j) for j in range(ORDER + 1)])
            m = self._moments[first:last]
            # (einsum, not BLAS: these small products never wake a second thread)
            at_centre_full = np.einsum("bj,j->b", m, series)  # Σ (x − r)·e^{iωu}, u block-centred
            moment1 = (BLOCK / 2.0) * np.einsum("bj,j->b", m[:, 1:], series[:ORDER])  # Σ u·(x − r)·e^{iωu}
            mids = np.arange(first, last) * float(BLOCK) + (BLOCK - 1) / 2.0 - centre
            turn = np.exp(1j * omega * mids)
            # per block Σ(x − mean)·e^{iωt} (block-centred Σe^{iωu} = D_BLOCK(ω), real), kept
            # for the phase track's segments (:meth:`segment_sums`)
            self._blocks = (float(omega), x, start, mean, first,
                            turn * (at_centre_full - (mean - self.reference) * _dirichlet(omega, BLOCK)))
            p = complex(np.einsum("b,b->", turn, at_centre_full))
            q = complex(np.einsum("b,b->", turn * mids, at_centre_full) + np.einsum("b,b->", turn, moment1))
            head_end, tail_start = first * BLOCK, last * BLOCK
        else:
            head_end = tail_start = start
            self._blocks = (float(omega), x, start, mean, first, np.zeros(0, dtype=complex))
        for lo, hi in ((start, head_end), (tail_start, x.size)):
            if hi > lo:
                t = np.arange(lo, hi) - centre
                e = np.exp(1j * omega * t) * (x[lo:hi] - self.reference)
                p += complex(np.sum(e))
                q += complex(np.dot(t, e))
        # the offset: Σ e^{iωt} = D(ω) (real, t symmetric) and Σ t·e^{iωt} = i·Σ t·sin(ωt)
        shift = mean - self.reference
        p -= shift * _dirichlet(omega, n)
        q -= 1j * shift * _dirichlet_derivatives(omega, n)[0]
        return p, q

    def segment_sums(self, bounds: np.ndarray) -> tuple[np.ndarray, float] | None:
        """Σ (y − mean)·e^{iωt} over each segment ``bounds[i]:bounds[i+1]`` of the last fitted
        part y at the last frequency evaluated (as
        :meth:`benchgate.analysis._phasor.Workspace.segment_sums` gives them): whole blocks
        from the kept per-block sums, ragged ends directly. None before any fit."""
        kept = getattr(self, "_blocks", None)
        if kept is None:
            return None
        omega, x, start, mean, first, blocks = kept
        n = x.size - start
        centre = start + (n - 1) / 2.0
        run = np.concatenate(([0.0 + 0.0j], np.cumsum(blocks)))

        def direct(lo: int, hi: int) -> complex:
            t = np.arange(lo, hi) - centre
            return complex(np.sum(np.exp(1j * omega * t) * (x[lo:hi] - mean)))

        out = np.empty(bounds.size - 1, dtype=complex)
        for i in range(bounds.size - 1):
            lo, hi = start + int(bounds[i]), start + int(bounds[i + 1])
            b_lo, b_hi = max(-(-lo // BLOCK), first), min(hi // BLOCK, first + blocks.size)
            if b_lo >= b_hi:
                out[i] = direct(lo, hi)
                continue
            total = run[b_hi - first] - run[b_lo - first]
            if lo < b_lo * BLOCK:
                total += direct(lo, b_lo * BLOCK)
            if hi > b_hi * BLOCK:
                total += direct(b_hi * BLOCK, hi)
            out[i] = total
        return out, mean

    def _moments_of_level(self, x: np.ndarray, start: int) -> tuple[float, float, int]:
        """Σ(y − r), Σ(y − r)² and n for y = x[start:]."""
        first = -(-start // BLOCK)
        last = min(x.size // BLOCK, self._sum.size)
        s1 = s2 = 0.0
        if first < last:
            s1, s2 = float(np.sum(self._sum[first:last])), float(np.sum(self._sum2[first:last]))
            pieces = ((start, first * BLOCK), (last * BLOCK, x.size))
        else:
            pieces = ((start, x.size),)
        for lo, hi in pieces:
            if hi > lo:
                d = x[lo:hi] - self.reference
                s1 += float(np.sum(d))
                s2 += float(np.dot(d, d))
        return s1, s2, x.size - start

    def fit4(self, x: np.ndarray, start: int, omega0: float, *, max_iter: int = 30) -> SineFit:
        """The four-parameter fit of ``x[start:]`` from ``omega0``, as
        :func:`benchgate.analysis.sinefit.fit4` would make it, with the sums kept over looks."""
        x = np.asarray(x, dtype=float)
        self._follow(x)
        s1, s2, n = self._moments_of_level(x, start)
        mean = self.reference + s1 / n
        sy = 0.0  # Σ(y − mean), zero up to rounding
        yy = max(s2 - s1 * s1 / n, 0.0)  # Σ(y − mean)² (r is near the mean: little cancellation)
        g = gauss_newton(lambda w: self._at(x, start, mean, w), n, sy, yy, omega0, max_iter=max_iter)
        a, b, c, rss = g.a, g.b, g.c, g.rss
        if not g.converged:  # as fit4: the three-parameter solution at the last frequency
            cc, s2, cs, sc, ss = _trig_sums(g.omega, n)
            gram = np.array([[cc, cs, sc], [cs, s2, ss], [sc, ss, float(n)]])
            r = np.array([g.p.real, g.p.imag, sy])
            sol = _lstsq_small(gram, r)
            a, b, c = (float(v) for v in sol)
            rss = max(yy - float(sol @ r), 0.0)  # from the normal equations (no residual pass)
        return SineFit(omega=g.omega, a=a, b=b, offset=c + mean, residual_var=rss / max(n - 4, 1),
                       n=n, iterations=g.iterations, converged=g.converged)
