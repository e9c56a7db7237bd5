"""Boards with an input: the AA-1 audio amplifier and the LP-2 active low-pass filter.

Both are state-space models x' = A x + B u, y = C x + D u of their circuits (ideal op-amps):

- AA-1: input coupling capacitor ``Cin`` into the bias resistor ``Rb`` (a first-order
  high-pass), a non-inverting stage of gain 1 + Rf/Rg whose output clips softly at its rails
  (±``swing`` V about its bias), and a tone filter ``Rt``–``Ct`` (first-order low-pass) to the
  output.
- LP-2: the same input coupling (``Cin``, ``Rb``) into a unity-gain Sallen–Key low-pass
  (``R1``, ``R2`` in series, ``C1`` from their junction to the output, ``C2`` to ground).

The generator drives a sine switched on (or changed) at a known instant, with the board's
capacitors taken as discharged then (every setting change starts a fresh transient, which a
plan lets settle). Where the board is linear over the record (no clipping), the response is
exact: the sine is made part of the state (a two-state oscillator) and the whole system is
sampled with one matrix exponential per step — no integration error. When the AA-1 stage
clips, its input (the high-pass output, still exact) goes through the clipping characteristic
and the tone filter is integrated with a first-order hold at a fine step, starting far enough
before the record (60 of its time constants) that its own start has died away.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from benchgate.errors import SimError
from benchgate.sim.circuits.linear import FirstOrderHold, expm

#: the knee of the soft clipping, as a fraction of the swing (linear below it)
KNEE = 0.9
#: fine steps per period of the stimulus on the clipping path
STEPS_PER_PERIOD = 400


@dataclass(frozen=True)
class AmplifierParams:
    cin: float
    rb: float
    rf: float
    rg: float
    rt: float
    ct: float
    swing: float  # V peak about the bias before the output clips

    @property
    def gain(self) -> float:
        return 1.0 + self.rf / self.rg


@dataclass(frozen=True)
class FilterParams:
    cin: float
    rb: float
    r1: float
    r2: float
    c1: float
    c2: float


@dataclass(frozen=True)
class Drive:
    """The generator's sine at the board's input: peak amplitude (V), offset (V), frequency (Hz),
    switched on (or last changed) at bench time ``since``; the board's capacitors are discharged
    at ``since``. The sine's phase is zero at ``origin`` (default: ``since``)."""

    frequency: float
    amplitude: float
    offset: float
    since: float
    origin: float | None = None

    @property
    def theta0(self) -> float:
        """Phase of the sine at ``since`` (rad)."""
        origin = self.since if self.origin is None else self.origin
        return 2 * math.pi * self.frequency * (self.since - origin)


def state_space(p: AmplifierParams | FilterParams) -> tuple[np.ndarray, np.ndarray, np.ndarray, float]:
    """(A, B, C, D) of the board as a linear system (the AA-1 without clipping)."""
    k = 1.0 / (p.rb * p.cin)  # coupling: v_c' = k·(u − v_c), w = u − v_c
    if isinstance(p, AmplifierParams):
        kt = 1.0 / (p.rt * p.ct)  # tone filter: x' = kt·(G·w − x), y = x
        g = p.gain
        a = np.array([[-k, 0.0], [-kt * g, -kt]])
        b = np.array([k, kt * g])
        return a, b, np.array([0.0, 1.0]), 0.0
    # Sallen–Key: states v_c, v_C1 (junction minus output), v_C2 (= output)
    a = np.array([[-k, 0.0, 0.0],
                  [-1.0 / (p.r1 * p.c1), -(1.0 / p.r1 + 1.0 / p.r2) / p.c1, -1.0 / (p.r1 * p.c1)],
                  [0.0, 1.0 / (p.r2 * p.c2), 0.0]])
    b = np.array([k, 1.0 / (p.r1 * p.c1), 0.0])
    return a, b, np.array([0.0, 0.0, 1.0]), 0.0


def transfer(p: AmplifierParams | FilterParams, f: np.ndarray) -> np.ndarray:
    """H(j2πf) = C (jωI − A)⁻¹ B + D of the linear model (complex, V/V)."""
    a, b, c, d = state_space(p)
    out = []
    for fk in np.atleast_1d(np.asarray(f, dtype=np.float64)):
        m = 1j * 2 * math.pi * fk * np.eye(a.shape[0]) - a
        out.append(c @ np.linalg.solve(m, b) + d)
    return np.array(out)


def _augmented(a: np.ndarray, b: np.ndarray, omega: float) -> np.ndarray:
    """System matrix of [s, c, o, x]: s + j·c the sine's phasor (s = A sin θ), o the offset."""
    n = a.shape[0]
    m = np.zeros((n + 3, n + 3))
    m[0, 1] = omega  # s' = ω c
    m[1, 0] = -omega  # c' = −ω s
    m[3:, 3:] = a
    m[3:, 0] = b  # u = s + o
    m[3:, 2] = b
    return m


def _sample(m: np.ndarray, z0: np.ndarray, t0: float, h: float, n: int) -> np.ndarray:
    """States of z' = m z at t0 + k·h, k = 0 … n−1 (z0 at time 0), by block powers of exp(m·h)."""
    z = expm(m * t0) @ z0
    step = expm(m * h)
    block = max(1, int(math.isqrt(n)))
    inner = [np.eye(m.shape[0])]
    for _ in range(block - 1):
        inner.append(step @ inner[-1])
    inner_stack = np.stack(inner)  # (block, d, d)
    jump = inner[-1] @ step  # exp(m·h·block)
    outer = []
    for _ in range(-(-n // block)):
        outer.append(z)
        z = jump @ z
    states = np.einsum("jab,ib->ija", inner_stack, np.stack(outer))  # (outer, block, d)
    return states.reshape(-1, m.shape[0])[:n]


def _linear(a, b, c, d, drive: Drive, t0: float, h: float, n: int) -> tuple[np.ndarray, np.ndarray]:
    """Exact input and output at t0 + k·h (t0 ≥ drive.since), from discharged capacitors at since."""
    omega = 2 * math.pi * drive.frequency
    m = _augmented(a, b, omega)
    z0 = np.zeros(m.shape[0])
    th = drive.theta0
    z0[0], z0[1], z0[2] = drive.amplitude * math.sin(th), drive.amplitude * math.cos(th), drive.offset
    states = _sample(m, z0, t0 - drive.since, h, n)
    u = states[:, 0] + states[:, 2]
    return u, states[:, 3:] @ c + d * u


def soft_clip(x: np.ndarray, swing: float) -> np.ndarray:
    """Linear up to KNEE·swing, then a tanh bend to ±swing (continuous slope at the knee)."""
    k = KNEE * swing
    ax = np.abs(x)
    bent = k + (swing - k) * np.tanh((ax - k) / (swing - k))
    return np.sign(x) * np.where(ax <= k, ax, bent)


def respond(p: AmplifierParams | FilterParams, drive: Drive | None, t0: float, rate: float,
            n: int) -> tuple[np.ndarray, np.ndarray]:
    """The board's input and output (V, AC part) at ``t0 + k/rate``, k = 0 … n−1.

    With no drive (generator off) both are zero. Raises SimError for a record that starts
    before the drive does (callers pass the later of the drive and the power-on instant).
    """
    if drive is None or n <= 0:
        return np.zeros(max(n, 0)), np.zeros(max(n, 0))
    if t0 < drive.since - 1e-12:
        raise SimError("a record starting before the generator setting is not simulated")
    h = 1.0 / rate
    a, b, c, d = state_space(p)
    u, y = _linear(a, b, c, d, drive, t0, h, n)
    if not isinstance(p, AmplifierParams):
        return u, y
    # the stage's own output before the tone filter, G·w with w = u − v_c (exact), over the
    # record and the tone filter's memory before it: below the knee everywhere, all is linear
    kt = 1.0 / (p.rt * p.ct)
    lead = min(int(math.ceil(60.0 / kt * rate)), int((t0 - drive.since) * rate))
    k = 1.0 / (p.rb * p.cin)
    _, w = _linear(np.array([[-k]]), np.array([k]), np.array([-1.0]), 1.0, drive, t0 - lead * h, h, n + lead)
    if p.gain * float(np.max(np.abs(w))) <= 0.98 * KNEE * p.swing:
        return u, y
    return u, _clipped(p, drive, t0, rate, n, kt)


def _clipped(p: AmplifierParams, drive: Drive, t0: float, rate: float, n: int, kt: float) -> np.ndarray:
    """Output through the clipping stage: fine-step first-order hold of the tone filter."""
    fine = max(1, int(math.ceil(STEPS_PER_PERIOD * drive.frequency / rate)), int(math.ceil(8.0 * kt / rate)))
    hf = 1.0 / (rate * fine)
    warm = int(math.ceil(60.0 / kt / hf))
    start = max(drive.since, t0 - warm * hf)
    lead = int(round((t0 - start) / hf))
    start = t0 - lead * hf
    total = lead + (n - 1) * fine + 1
    k = 1.0 / (p.rb * p.cin)
    _, w = _linear(np.array([[-k]]), np.array([k]), np.array([-1.0]), 1.0, drive, start, hf, total)
    e = soft_clip(p.gain * w, p.swing)
    hold = FirstOrderHold.build(np.array([[-kt]]), np.array([kt]), hf)
    phi, g0, g1 = float(hold.phi[0, 0]), float(hold.g0[0]), float(hold.g1[0])
    x = float(e[0])  # the filter starts settled on the stage's first value
    out = np.empty(total)
    out[0] = x
    el = e.tolist()
    for i in range(1, total):
        x = phi * x + g0 * el[i - 1] + g1 * el[i]
        out[i] = x
    return out[lead::fine][:n]
