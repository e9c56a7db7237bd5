"""exp(i·ω·t) over a capture as a block product, its projections, and the closed-form
trigonometric sums the IEEE 1057 fits need (Dirichlet kernel and its derivatives).

t is in samples from the middle of the capture, t = k − (n−1)/2, as in
:mod:`benchgate.analysis.sinefit`.
"""

from __future__ import annotations

import math

import numpy as np

#: most multiply–adds per matrix product call: OpenBLAS runs smaller products on one thread
#: (m·n·k below 65536·4), which keeps the cost predictable on a busy machine.
CHUNK_MACS = 131072


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
        rows = max(1, CHUNK_MACS // (cols * width))
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


#: rows per matrix–vector product in :func:`pair_dot`: OpenBLAS runs a product of fewer than
#: 2304·4 elements on one thread (waking a second one on a busy machine can cost a scheduler tick).
_PAIR_ROWS = 4096


def pair_dot(v: np.ndarray, pair: np.ndarray) -> np.ndarray:
    """v @ pair for a (n, 2) ``pair`` (Σv·cos, Σv·sin), a few thousand rows at a time."""
    if v.size <= _PAIR_ROWS:
        return np.dot(v, pair)
    out = np.zeros(2)
    for i in range(0, v.size, _PAIR_ROWS):
        out += np.dot(v[i:i + _PAIR_ROWS], pair[i:i + _PAIR_ROWS])
    return out
