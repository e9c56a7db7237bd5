"""RC phase-shift ladder oscillator: N RC sections around an inverting one-transistor amplifier.

The amplifier is a Thevenin source: its open-circuit output is ``bias + sat(-gain·v_in)``
(soft tanh saturation toward the rails) behind the output resistance ``r_out`` (the collector
resistor); its input resistance ``r_in`` loads the ladder's last node (in parallel with the last
shunt resistor for the high-pass form, or the only load of the last shunt capacitor for the
low-pass form). The test point is the collector. The circuit starts from a tiny random state
(noise at power-on), grows at the rate the excess loop gain allows and settles where the
saturation has cut the effective gain down to what the ladder needs: start-up time, amplitude
and distortion all come out of the simulation.

Handbook values (docs/references.md): three equal sections, ideal source and load, high-pass form
oscillates at 1/(2πRC√6) with |gain| ≥ 29; the low-pass form at √6/(2πRC).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from benchgate.sim.circuits.engine import LoopStepper, LoopSystem, soft_limit


@dataclass(frozen=True)
class LadderParams:
    """Component values of a ladder oscillator, in ohms, farads, volts and amperes."""

    r: tuple[float, ...]  # per section (series R for low-pass, shunt R for high-pass)
    c: tuple[float, ...]  # per section
    kind: str = "high-pass"  # "high-pass" (series C, shunt R) or "low-pass" (series R, shunt C)
    gain: float = 40.0  # small-signal voltage gain magnitude (inverting)
    r_out: float = 1000.0  # amplifier output resistance (collector resistor)
    r_in: float = 47e3  # amplifier input resistance
    supply: float = 9.0
    bias: float = 4.6  # quiescent collector voltage
    headroom: float = 0.35  # how close to each rail the output saturates
    bias_current: float = 0.2e-3  # base divider and emitter branch, drawn from the supply

    def __post_init__(self) -> None:
        if len(self.r) != len(self.c) or len(self.r) < 1:
            raise ValueError("a ladder needs the same number (≥ 1) of resistors and capacitors")
        if self.kind not in ("high-pass", "low-pass"):
            raise ValueError(f"ladder kind must be 'high-pass' or 'low-pass', got {self.kind!r}")
        if any(not v > 0 for v in (*self.r, *self.c, self.r_out, self.r_in, self.gain)):
            raise ValueError("ladder component values and gain must be positive")

    @property
    def swing_high(self) -> float:
        return self.supply - self.headroom - self.bias

    @property
    def swing_low(self) -> float:
        return self.bias - self.headroom


def state_space(p: LadderParams):
    """Matrices (A, B, c_in, d_in, c_out, d_out) of the ladder driven by the amplifier's
    open-circuit voltage ``e`` (AC part): x' = A x + B e, v_in = c_in·x + d_in e,
    v_collector = c_out·x + d_out e. States are the capacitor voltages."""
    n = len(p.r)
    g = 1.0 / np.asarray(p.r, dtype=np.float64)
    c = np.asarray(p.c, dtype=np.float64)
    g_out, g_in = 1.0 / p.r_out, 1.0 / p.r_in
    if p.kind == "high-pass":
        gs = g.copy()
        gs[-1] += g_in  # the last shunt resistor in parallel with the amplifier input
        low = np.tril(np.ones((n, n)))  # v_k = vo - sum_{j<=k} q_j
        # KCL at the collector: (e - vo) g_out = sum_k gs_k v_k
        denom = g_out + gs.sum()
        vo_x = (gs @ low) / denom
        vo_e = g_out / denom
        v_x = vo_x[None, :] - low  # (n, n)
        v_e = np.full(n, vo_e)
        upper = np.triu(np.ones((n, n)))  # current of cap j = sum_{k>=j} gs_k v_k
        i_x = upper @ (gs[:, None] * v_x)
        i_e = upper @ (gs * v_e)
        a = i_x / c[:, None]
        b = i_e / c
        return a, b, v_x[-1], float(v_e[-1]), vo_x, float(vo_e)
    # low-pass: series R_k from v_{k-1} to v_k, shunt C_k at v_k; v_0 = collector
    a = np.zeros((n, n))
    b = np.zeros(n)
    g1 = g[0]
    vo_x = np.zeros(n)
    vo_x[0] = g1 / (g_out + g1)
    vo_e = g_out / (g_out + g1)
    for k in range(n):
        if k == 0:
            # current in from the collector node: g1 (vo - v0), vo = vo_x·x + vo_e e
            a[0] += g1 * vo_x
            a[0, 0] -= g1
            b[0] += g1 * vo_e
        else:
            a[k, k - 1] += g[k]
            a[k, k] -= g[k]
        if k + 1 < n:
            a[k, k] -= g[k + 1]
            a[k, k + 1] += g[k + 1]
        else:
            a[k, k] -= g_in
    a /= c[:, None]
    b /= c
    c_in = np.zeros(n)
    c_in[-1] = 1.0
    return a, b, c_in, 0.0, vo_x, float(vo_e)


def loop_gain(p: LadderParams, freq: np.ndarray) -> np.ndarray:
    """Complex small-signal loop gain -gain·H(j2πf) (H: e to amplifier input)."""
    a, b, c_in, d_in, _, _ = state_space(p)
    out = []
    for f in np.atleast_1d(freq):
        s = 2j * np.pi * f
        h = c_in @ np.linalg.solve(s * np.eye(len(b)) - a, b) + d_in
        out.append(-p.gain * h)
    return np.asarray(out)


def linear_frequency(p: LadderParams) -> tuple[float, float]:
    """Frequency (Hz) where the loop phase is zero, and the gain magnitude needed there."""
    a, b, c_in, d_in, _, _ = state_space(p)
    scale = 1.0 / (2 * np.pi * float(np.exp(np.mean(np.log(np.asarray(p.r) * np.asarray(p.c))))))
    freqs = np.geomspace(scale / 30, scale * 30, 4000)
    h = np.array([c_in @ np.linalg.solve(2j * np.pi * f * np.eye(len(b)) - a, b) + d_in for f in freqs])
    # inverting amplifier: need H real and negative
    im = h.imag
    idx = np.nonzero((np.sign(im[:-1]) != np.sign(im[1:])) & (h.real[:-1] < 0))[0]
    if idx.size == 0:
        return float("nan"), float("inf")
    i = int(idx[0])
    lo, hi = freqs[i], freqs[i + 1]
    for _ in range(60):
        mid = np.sqrt(lo * hi)
        hm = c_in @ np.linalg.solve(2j * np.pi * mid * np.eye(len(b)) - a, b) + d_in
        hl = c_in @ np.linalg.solve(2j * np.pi * lo * np.eye(len(b)) - a, b) + d_in
        if np.sign(hm.imag) == np.sign(hl.imag):
            lo = mid
        else:
            hi = mid
    hm = c_in @ np.linalg.solve(2j * np.pi * lo * np.eye(len(b)) - a, b) + d_in
    return float(lo), float(1.0 / abs(hm))


def system(p: LadderParams) -> LoopSystem:
    a, b, c_in, d_in, c_out, d_out = state_space(p)
    amp = soft_limit(p.gain, p.swing_high, p.swing_low)
    return LoopSystem(a, b, c_in, d_in, c_out, d_out, amp, bias=p.bias)


def stepper(p: LadderParams, rate: float, *, seed: int = 0, start_noise: float = 1e-3) -> LoopStepper:
    """A stepper at ``rate`` Hz starting from capacitor voltages of ``start_noise`` V rms."""
    rng = np.random.default_rng(seed)
    return LoopStepper(system(p), rate, rng.normal(0.0, start_noise, size=len(p.r)))


def simulate(p: LadderParams, duration: float, rate: float, *, seed: int = 0,
             start_noise: float = 1e-3) -> np.ndarray:
    """Collector voltage (V) from power-on, ``duration`` s at ``rate`` Hz."""
    return stepper(p, rate, seed=seed, start_noise=start_noise).run(int(round(duration * rate)))


def supply_current(p: LadderParams, v_collector: np.ndarray) -> np.ndarray:
    """Current drawn from the supply (A) for the given collector voltages: bias branches plus
    the collector resistor's current (the transistor's current varies with the swing)."""
    return p.bias_current + (p.supply - np.asarray(v_collector)) / p.r_out
