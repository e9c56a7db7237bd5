"""A linear network closed through one static nonlinear amplifier, stepped in time.

The circuit models (RC ladder, Wien bridge) are a linear RC network driven by an amplifier whose
output ``e`` is a static nonlinear function of the network's sensing voltage ``y``:

    x' = A x + B e,   y = c_in·x + d_in e,   e = amp(y),   v_out = c_out·x + d_out e

The linear part is integrated exactly with a first-order hold on ``e``; the hold's end value
makes each step implicit in ``e[k+1]``, a scalar equation solved by Newton's method (the
amplifier is monotone, so the root is unique; Newton is kept inside a bracket so that hard
saturation cannot throw it off). The loop runs on Python floats in a generated, unrolled
kernel: a few microseconds a step, so a 1 kHz oscillator at ~100 steps a period simulates a
second in about half a second (more on a loaded machine). ``trace.LoopTrace`` adds the
bookkeeping the understudy bench needs: it extends the waveform on demand and, once the limit
cycle has settled, continues it periodically from one simulated period (everything up to the
settled cycle, start-up included, is integrated).
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass

import numpy as np

from benchgate.sim.circuits.linear import FirstOrderHold


@dataclass(frozen=True)
class Amplifier:
    """A static, monotone amplifier characteristic ``e = f(y)`` with its derivative."""

    f: Callable[[float], float]
    df: Callable[[float], float]
    low: float  # f stays within [low, high]
    high: float
    fd: Callable[[float], tuple[float, float]] | None = None  # (f, df) in one call

    def __post_init__(self) -> None:
        if self.fd is None:
            object.__setattr__(self, "fd", lambda y: (self.f(y), self.df(y)))


def _root(f, df, ystar: float, dd: float, guess: float, lo: float, hi: float) -> float:
    """The root of ``e - f(ystar + dd·e)`` (increasing in e; f bounded by [lo, hi]):
    Newton's method kept inside a bracket, falling back to bisection."""
    e = min(max(guess, lo), hi)
    for _ in range(60):
        y = ystar + dd * e
        fy = f(y)
        g = e - fy
        if g > 0:
            hi = e
        else:
            lo = e
        step = g / (1.0 - df(y) * dd)
        new = e - step
        if not lo < new < hi:
            new = 0.5 * (lo + hi)
        if abs(new - e) <= 1e-12 * (1.0 + abs(e)) or hi - lo <= 1e-12:
            return new
        e = new
    return e


@dataclass(frozen=True)
class LoopSystem:
    a: np.ndarray
    b: np.ndarray
    c_in: np.ndarray
    d_in: float
    c_out: np.ndarray
    d_out: float
    amp: Amplifier
    bias: float = 0.0  # added to the output (e.g. the collector's quiescent voltage)


class LoopStepper:
    """Steps a :class:`LoopSystem` at a fixed ``rate`` (Hz), keeping its state between calls."""

    def __init__(self, system: LoopSystem, rate: float, x0: np.ndarray):
        self.system = system
        self.rate = float(rate)
        foh = FirstOrderHold.build(system.a, system.b, 1.0 / self.rate)
        self._phi = [list(map(float, row)) for row in foh.phi]
        self._g0 = list(map(float, foh.g0))
        self._g1 = list(map(float, foh.g1))
        c_in = np.asarray(system.c_in, dtype=np.float64)
        # y*[k+1] = cy·x[k] + cg·e[k];  y[k+1] = y* + dd·e[k+1]
        self._cy = list(map(float, c_in @ foh.phi))
        self._cg = float(c_in @ foh.g0)
        self._dd = float(c_in @ foh.g1) + float(system.d_in)
        self._c_out = list(map(float, system.c_out))
        self._d_out = float(system.d_out)
        self.x = list(map(float, x0))
        y0 = float(np.dot(c_in, np.asarray(self.x)))
        self.e = self._solve(y0, float(system.d_in), 0.0)
        self._e_prev = self.e
        self._kernel = None

    def _solve(self, ystar: float, dd: float, guess: float) -> float:
        amp = self.system.amp
        return _root(amp.f, amp.df, ystar, dd, guess, amp.low, amp.high)

    def run(self, n: int) -> np.ndarray:
        """Advance ``n`` steps; return the output voltage after each step."""
        if self._kernel is None:
            self._kernel = _build_kernel(self._phi, self._g0, self._g1, self._cy, self._cg, self._dd,
                                         self._c_out, self._d_out, self.system.bias)
        amp = self.system.amp
        out, self.x, self.e, self._e_prev = self._kernel(
            int(n), self.x, self.e, self._e_prev, amp.fd, amp.low, amp.high)
        return np.asarray(out, dtype=np.float64)


_KERNEL = """
def kernel(n, x, e, e_prev, fd, lo0, hi0):
    {unpack} = x
    out = []
    push = out.append
    for _ in range(n):
        ystar = {ystar}
        # e1 = f(ystar + dd*e1): Newton inside a bracket, bisection as the fallback,
        # starting from the linear extrapolation of the last two values
        lo, hi = lo0, hi0
        e1 = min(max(2.0 * e - e_prev, lo), hi)
        for _ in range(60):
            fy, dfy = fd(ystar + {dd} * e1)
            g = e1 - fy
            if g > 0.0:
                hi = e1
            else:
                lo = e1
            new = e1 - g / (1.0 - dfy * {dd})
            if not lo < new < hi:
                new = 0.5 * (lo + hi)
            if abs(new - e1) <= 1e-10:
                e1 = new
                break
            e1 = new
        {update}
        e_prev, e = e, e1
        push({output})
    return out, [{unpack}], e, e_prev
"""


def _build_kernel(phi, g0, g1, cy, cg, dd, c_out, d_out, bias):
    """The stepping loop with the matrices written out as constants (unrolled: several times
    faster in CPython than looping over rows)."""
    n = len(g0)
    names = [f"x{i}" for i in range(n)]

    def dot(coefs, terms):
        return " + ".join(f"{float(c)!r} * {t}" for c, t in zip(coefs, terms, strict=True))

    rows = [dot([*phi[i], g0[i], g1[i]], [*names, "e", "e1"]) for i in range(n)]
    src = _KERNEL.format(
        unpack=", ".join(names) + ("," if n == 1 else ""),
        ystar=dot([cg, *cy], ["e", *names]),
        dd=repr(float(dd)),
        update=", ".join(names) + " = " + ", ".join(f"({r})" for r in rows),
        output=f"{float(bias)!r} + " + dot([d_out, *c_out], ["e", *names]),
    )
    scope: dict = {}
    exec(compile(src, "<loop-kernel>", "exec"), scope)  # noqa: S102 - our own generated code
    return scope["kernel"]


def soft_limit(gain: float, high: float, low: float) -> Amplifier:
    """Inverting amplifier ``e = sat(-gain·y)``: small-signal gain ``-gain``, saturating softly
    (tanh) toward ``+high`` and ``-low`` volts about its bias."""
    if not (gain > 0 and high > 0 and low > 0):
        raise ValueError("amplifier gain and swing limits must be positive")

    def f(y: float) -> float:
        z = -gain * y
        lim = high if z > 0 else low
        return lim * math.tanh(z / lim)

    def df(y: float) -> float:
        z = -gain * y
        lim = high if z > 0 else low
        t = math.tanh(z / lim)
        return -gain * (1.0 - t * t)

    def fd(y: float) -> tuple[float, float]:
        z = -gain * y
        lim = high if z > 0 else low
        t = math.tanh(z / lim)
        return lim * t, -gain * (1.0 - t * t)

    return Amplifier(f, df, -low, high, fd)
