"""Wien-bridge oscillator with diode amplitude limiting.

A non-inverting op-amp stage of gain ``1 + rf/rg`` (a little above the 3 the bridge needs)
drives the bridge: series ``r1``–``c1`` from the output to the non-inverting input, ``r2`` ∥
``c2`` from there to the (AC) ground of the mid-rail bias. Two anti-parallel diodes in series
with ``rd`` across ``rf`` conduct more as the swing grows (modelled as a soft conductance: the
feedback element's voltage is ``rp·i + (rf - rp)·i_k·s(i/i_k)`` with the smooth limiter
``s(x) = x / (1 + |x|^p)^(1/p)``, ``rp = rf ∥ rd``, and the knee current ``i_k`` putting the knee
at the diode voltage; ``p`` sets how sharp the knee is), so the gain falls back to 3 at a
steady amplitude. The op-amp output saturates softly ``headroom`` volts from each rail.

Handbook values (docs/references.md): equal R and C give f = 1/(2πRC) and feedback 1/3; in general
f = 1/(2π√(R1R2C1C2)).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from benchgate.sim.circuits.engine import Amplifier, LoopStepper, LoopSystem


@dataclass(frozen=True)
class WienParams:
    r1: float = 16e3
    r2: float = 16e3
    c1: float = 10e-9
    c2: float = 10e-9
    rf: float = 21e3
    rg: float = 10e3
    rd: float = 15e3
    diode_drop: float = 0.55
    knee: float = 3.0  # sharpness p of the diodes' knee
    supply: float = 12.0
    headroom: float = 1.2
    quiescent_current: float = 5.6e-3  # op-amp and bias divider
    load_resistance: float = 8e3  # what the output drives (feedback + bridge), for the current draw

    def __post_init__(self) -> None:
        values = (self.r1, self.r2, self.c1, self.c2, self.rf, self.rg, self.rd, self.diode_drop, self.knee)
        if any(not v > 0 for v in values):
            raise ValueError("Wien-bridge component values must be positive")

    @property
    def gain(self) -> float:
        return 1.0 + self.rf / self.rg

    @property
    def bias(self) -> float:
        return self.supply / 2.0

    @property
    def frequency(self) -> float:
        """Handbook frequency 1/(2π√(R1R2C1C2)) in Hz."""
        return 1.0 / (2.0 * math.pi * math.sqrt(self.r1 * self.r2 * self.c1 * self.c2))


def state_space(p: WienParams):
    """x = [v_c1, v_c2]; input: op-amp output (AC); sensed: the non-inverting input v_c2."""
    a = np.array([
        [-1.0 / (p.r1 * p.c1), -1.0 / (p.r1 * p.c1)],
        [-1.0 / (p.r1 * p.c2), -1.0 / (p.r1 * p.c2) - 1.0 / (p.r2 * p.c2)],
    ])
    b = np.array([1.0 / (p.r1 * p.c1), 1.0 / (p.r1 * p.c2)])
    return a, b, np.array([0.0, 1.0]), 0.0, np.zeros(2), 1.0


def amplifier(p: WienParams) -> Amplifier:
    """Op-amp output (AC) as a function of its non-inverting input: y + v_f(y/rg), saturated."""
    rp = p.rf * p.rd / (p.rf + p.rd)
    i_k = p.diode_drop / (p.rf - rp)
    swing = p.supply / 2.0 - p.headroom
    span = p.rf - rp
    pw = float(p.knee)
    cubic = pw == 3.0
    inv = -1.0 / pw

    def fd(y: float) -> tuple[float, float]:
        i = y / p.rg
        x = i / i_k
        u = abs(x)
        q = 1.0 + (u * u * u if cubic else u**pw)
        r = q**inv  # (1 + |x|^p)^(-1/p)
        lin = y + rp * i + span * i_k * x * r
        dlin = 1.0 + (rp + span * r / q) / p.rg
        s = math.tanh(lin / swing)
        return swing * s, (1.0 - s * s) * dlin

    return Amplifier(lambda y: fd(y)[0], lambda y: fd(y)[1], -swing, swing, fd)


def system(p: WienParams) -> LoopSystem:
    a, b, c_in, d_in, c_out, d_out = state_space(p)
    return LoopSystem(a, b, c_in, d_in, c_out, d_out, amplifier(p), bias=p.bias)


def stepper(p: WienParams, rate: float, *, seed: int = 0, start_noise: float = 1e-3) -> LoopStepper:
    rng = np.random.default_rng(seed)
    return LoopStepper(system(p), rate, rng.normal(0.0, start_noise, size=2))


def simulate(p: WienParams, duration: float, rate: float, *, seed: int = 0,
             start_noise: float = 1e-3) -> np.ndarray:
    """Op-amp output voltage (V) from power-on, ``duration`` s at ``rate`` Hz."""
    return stepper(p, rate, seed=seed, start_noise=start_noise).run(int(round(duration * rate)))


def supply_current(p: WienParams, v_out: np.ndarray) -> np.ndarray:
    """Supply current (A): quiescent plus the output current the op-amp sources or sinks."""
    return p.quiescent_current + np.abs(np.asarray(v_out) - p.bias) / p.load_resistance
