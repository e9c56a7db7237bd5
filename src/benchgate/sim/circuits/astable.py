"""Timer astable: a capacitor relaxing between 1/3 and 2/3 of the supply.

The capacitor charges through ``r1 + r2`` toward the supply while the output is high, and
discharges through ``r2`` into the discharge pin while it is low; the two comparators switch at
2/3 and 1/3 of the supply. Between switchings the capacitor voltage is an exact exponential, so
the switching instants follow in closed form and the waveform is computed event by event,
vectorised over time (no integration error). From power-on the capacitor starts empty: the first
high time (0 → 2/3) is ``ln 3·(r1 + r2)·C``, then ``t_high = ln 2·(r1 + r2)·C`` and
``t_low = ln 2·r2·C`` alternate (docs/references.md: f = 1/(ln2·(R1+2R2)·C), duty (R1+R2)/(R1+2R2)).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np


@dataclass(frozen=True)
class AstableParams:
    r1: float = 1e3
    r2: float = 6.8e3
    c: float = 100e-9
    supply: float = 9.0
    out_high_drop: float = 0.05  # output high sits this far below the supply
    out_low: float = 0.03
    quiescent_current: float = 2.0e-3
    load_resistance: float = 3e3  # what the output drives while high (indicator + test divider)

    def __post_init__(self) -> None:
        if not (self.r1 > 0 and self.r2 > 0 and self.c > 0 and self.supply > 0):
            raise ValueError("astable component values and supply must be positive")

    @property
    def t_high(self) -> float:
        return math.log(2.0) * (self.r1 + self.r2) * self.c

    @property
    def t_low(self) -> float:
        return math.log(2.0) * self.r2 * self.c

    @property
    def t_first(self) -> float:
        return math.log(3.0) * (self.r1 + self.r2) * self.c

    @property
    def frequency(self) -> float:
        return 1.0 / (self.t_high + self.t_low)

    @property
    def duty(self) -> float:
        return self.t_high / (self.t_high + self.t_low)


def _phase(p: AstableParams, tau: np.ndarray):
    """For times since power-on: (is_high, seconds into the current half-period,
    capacitor voltage at the start of that half-period)."""
    tau = np.asarray(tau, dtype=np.float64)
    period = p.t_high + p.t_low
    first = tau < p.t_first
    rest = np.where(first, 0.0, tau - p.t_first)  # time since the first 2/3 crossing
    into = np.mod(rest, period)
    low = ~first & (into < p.t_low)
    high = ~low
    since = np.where(first, tau, np.where(low, into, into - p.t_low))
    v0 = np.where(first, 0.0, np.where(low, 2.0 / 3.0, 1.0 / 3.0)) * p.supply
    return high, since, v0


def output(p: AstableParams, tau: np.ndarray) -> np.ndarray:
    """Timer output voltage (V) at ``tau`` seconds after power-on."""
    high, _, _ = _phase(p, tau)
    return np.where(high, p.supply - p.out_high_drop, p.out_low)


def capacitor(p: AstableParams, tau: np.ndarray) -> np.ndarray:
    """Timing-capacitor voltage (V) at ``tau`` seconds after power-on."""
    high, since, v0 = _phase(p, tau)
    charge = p.supply + (v0 - p.supply) * np.exp(-since / ((p.r1 + p.r2) * p.c))
    discharge = v0 * np.exp(-since / (p.r2 * p.c))
    return np.where(high, charge, discharge)


def simulate(p: AstableParams, duration: float, rate: float) -> np.ndarray:
    """Output voltage from power-on, ``duration`` s at ``rate`` Hz."""
    return output(p, np.arange(int(round(duration * rate))) / rate)


def supply_current(p: AstableParams, tau: np.ndarray) -> np.ndarray:
    """Supply current (A): quiescent, the charging current through r1 + r2 and the output load
    while high, the current through r1 into the discharge pin while low."""
    high, _, _ = _phase(p, tau)
    vc = capacitor(p, tau)
    charging = (p.supply - vc) / (p.r1 + p.r2) + (p.supply - p.out_high_drop) / p.load_resistance
    return p.quiescent_current + np.where(high, charging, p.supply / p.r1)
