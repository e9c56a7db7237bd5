"""Windows derived from the design: worst case over tolerance corners, and a Monte Carlo spread.

A circuit is a topology, its options and its toleranced parts (one entry per physical part:
a ladder with a shared ``R`` still has N independent resistors). The worst-case window is the
range of the output over every corner of the tolerance box, enumerated exactly (2^k corners for
k toleranced parts, evaluated in one vectorised call). Corners give the true extremes when the
output is monotonic in each part. That holds for all topologies here: for the Wien bridge, the
timer and the LC tanks it follows from the closed forms (frequency falls as any R, C or L grows;
the timer's duty (R1+R2)/(R1+2R2) rises with R1 and falls with R2); for the RC ladder, with
source and load, frequency falls as any part grows, which the tests check by perturbing every
part of random ladders. As a safeguard the Monte Carlo draws are also compared with the corner
window, and the window is widened to them (and says so) if one fell outside.

References
----------
JCGM 101:2008, Evaluation of measurement data — Supplement 1 to the GUM: Propagation of
distributions using a Monte Carlo method (draw the inputs from their distributions, evaluate
the model per draw, read intervals off the output's distribution). The worst case at the
corners of the tolerance box is common practice, no single source. See docs/references.md.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from benchgate.plan import network, stages
from benchgate.plan.limits import Window
from benchgate.units.format import format_quantity
from benchgate.units.tolerance import Part, Tolerance

MAX_CORNER_PARTS = 16
DEFAULT_DRAWS = 20_000
MIN_DRAWS = 10_000
MAX_DRAWS = 1_000_000
#: circuit evaluations (corners + Monte Carlo draws, weighted by :func:`work_weight`) one plan
#: may ask for, so that loading and `benchgate inspect` finish within a few seconds on any plan
#: the loader accepts; one unit is about a microsecond on a small CI machine.
MAX_PLAN_WORK = 1_500_000
DISTRIBUTIONS = ("uniform", "normal")

#: topology -> (options with allowed values, parts: key -> unit, required parts, outputs)
TOPOLOGIES: dict[str, dict[str, Any]] = {
    "rc_ladder": {
        "doc": "RC phase-shift ladder of N >= 3 sections driven by an inverting amplifier",
        "options": {"form": ("highpass", "lowpass"), "sections": "int"},
        "parts": {"R": "Ω", "C": "F", "source": "Ω", "load": "Ω"},
        "required": ("R", "C"),
        "per_section": ("R", "C"),
        "outputs": {"frequency": "frequency"},
        "formula": "f where the ABCD chain's phase is 180° (numeric); gain needed = |Vin/Vout| there",
    },
    "wien_bridge": {
        "doc": "Wien bridge: series R1-C1, shunt R2 || C2, non-inverting amplifier",
        "options": {},
        "parts": {"R1": "Ω", "R2": "Ω", "C1": "F", "C2": "F"},
        "required": ("R1", "R2", "C1", "C2"),
        "per_section": (),
        "outputs": {"frequency": "frequency"},
        "formula": "f where the Wien network's phase is 0 (numeric; 1/(2π√(R1R2C1C2))); "
                   "gain needed = 1 + R1/R2 + C2/C1",
    },
    "timer_astable": {
        "doc": "timer astable, thresholds 1/3 and 2/3 of the supply",
        "options": {},
        "parts": {"R1": "Ω", "R2": "Ω", "C": "F"},
        "required": ("R1", "R2", "C"),
        "per_section": (),
        "outputs": {"frequency": "frequency", "duty_cycle": "duty"},
        "formula": "RC charging law: t_high = ln2·(R1+R2)·C, t_low = ln2·R2·C",
    },
    "lc_tank": {
        "doc": "LC tank: Colpitts (L, C1, C2) or Hartley (L1, L2, optional M, C)",
        "options": {"type": ("colpitts", "hartley")},
        "parts": {"L": "H", "C1": "F", "C2": "F", "L1": "H", "L2": "H", "M": "H", "C": "F"},
        "required": (),
        "per_section": (),
        "outputs": {"frequency": "frequency"},
        "formula": "f where the tank's loop reactance is zero (numeric)",
    },
}

TOPOLOGIES.update(stages.TOPOLOGIES)  # gain stages and filters (plan/stages.py)

LC_PARTS = {"colpitts": (("L", "C1", "C2"), ()), "hartley": (("L1", "L2", "C"), ("M",))}


@dataclass(frozen=True)
class Circuit:
    """A topology with options and its physical parts (name -> Part, SI units)."""

    topology: str
    options: dict[str, Any]
    parts: dict[str, Part]

    def describe(self) -> str:
        t = self.topology
        if t == "rc_ladder":
            return f"rc_ladder {self.options['form']} {self.options['sections']} sections"
        if t == "lc_tank":
            return f"lc_tank {self.options['type']}"
        if t in stages.TOPOLOGIES:
            return stages.describe(t, self.options)
        return t


def evaluate(circuit: Circuit, values: dict[str, np.ndarray]) -> dict[str, np.ndarray]:
    """Outputs of ``circuit`` for arrays of part values (every part name present)."""
    t = circuit.topology
    if t == "rc_ladder":
        n = circuit.options["sections"]
        R = np.stack([values[f"R{i + 1}"] for i in range(n)], axis=-1)
        C = np.stack([values[f"C{i + 1}"] for i in range(n)], axis=-1)
        return network.rc_ladder(R, C, form=circuit.options["form"], source=values.get("source"),
                                  load=values.get("load"))
    if t == "wien_bridge":
        return network.wien_bridge(values["R1"], values["R2"], values["C1"], values["C2"])
    if t == "timer_astable":
        return network.timer_astable(values["R1"], values["R2"], values["C"])
    if t == "lc_tank":
        if circuit.options["type"] == "colpitts":
            return network.colpitts(values["L"], values["C1"], values["C2"])
        return network.hartley(values["L1"], values["L2"], values["C"], values.get("M", 0.0))
    if t in stages.TOPOLOGIES:
        return stages.evaluate(t, circuit.options, values)
    raise ValueError(f"unknown topology {t!r}")


def output_scale(measurement: str) -> float:
    """Factor from the circuit output to the measurement's unit (duty fraction -> %)."""
    return 100.0 if measurement == "duty_cycle" else 1.0


@dataclass(frozen=True)
class Derivation:
    """Everything the worst-case and Monte Carlo analysis found for one output."""

    measurement: str
    unit: str
    nominal: float
    low: float
    high: float
    corners: int
    low_corner: dict[str, str]
    high_corner: dict[str, str]
    gain_nominal: float | None
    gain_worst: float | None
    monte_carlo: dict[str, Any] = field(default_factory=dict)
    widened_by_mc: bool = False


def _corner_values(circuit: Circuit) -> tuple[dict[str, np.ndarray], list[str], np.ndarray]:
    names = list(circuit.parts)
    varied = [n for n in names if circuit.parts[n].low != circuit.parts[n].high]
    k = len(varied)
    if k > MAX_CORNER_PARTS:
        raise ValueError(f"{k} toleranced parts: exact corner enumeration is limited to "
                         f"{MAX_CORNER_PARTS} (2^{MAX_CORNER_PARTS} corners)")
    bits = ((np.arange(2**k)[:, None] >> np.arange(k)[None, :]) & 1).astype(bool)
    values: dict[str, np.ndarray] = {}
    for n in names:
        p = circuit.parts[n]
        if n in varied:
            j = varied.index(n)
            values[n] = np.where(bits[:, j], p.high, p.low)
        else:
            values[n] = np.full(2**k, p.nominal)
    return values, varied, bits


def work_weight(circuit: Circuit) -> int:
    """Relative cost of evaluating ``circuit`` at one point (about 1 µs per unit, measured).

    The ladder solves its phase condition on a grid per point, each section adding to it; the
    Wien bridge and the tanks find a root numerically; the timer is a closed form.
    """
    if circuit.topology == "rc_ladder":
        return 8 + int(circuit.options.get("sections") or 3)
    if circuit.topology == "wien_bridge":
        return 2
    return 1


def work(circuit: Circuit, draws: int) -> int:
    """The evaluation work of :func:`analyze` for ``circuit`` and ``draws``: nominal, corners, draws."""
    varied = sum(1 for p in circuit.parts.values() if p.low != p.high)
    corners = 2 ** min(varied, MAX_CORNER_PARTS)
    return (1 + corners + draws) * work_weight(circuit)


class WorkBudget:
    """The evaluation work one plan has asked for so far; a derivation asked twice costs once."""

    def __init__(self, limit: int | None = None):
        self.limit = MAX_PLAN_WORK if limit is None else limit
        self.spent = 0
        self._seen: set[Any] = set()

    def charge(self, key: Any, cost: int) -> bool:
        """Book ``cost`` for derivation ``key``; False (nothing booked) when it would overrun."""
        if key in self._seen:
            return True
        if self.spent + cost > self.limit:
            return False
        self._seen.add(key)
        self.spent += cost
        return True


def draw(circuit: Circuit, draws: int, seed: int, distribution: str = "uniform") -> dict[str, np.ndarray]:
    """Monte Carlo part values: independent per part, inside each tolerance band.

    ``uniform``: rectangular over the band. ``normal``: centred on the nominal with the band's
    wider side as 3σ, clipped to the band.

    References
    ----------
    JCGM 101:2008 (assigning probability density functions to the inputs: a rectangular one
    for a quantity known only to lie within an interval).
    """
    rng = np.random.default_rng(seed)
    out: dict[str, np.ndarray] = {}
    for n in sorted(circuit.parts):  # sorted: the draw does not depend on key order
        p = circuit.parts[n]
        if distribution == "uniform":
            out[n] = rng.uniform(p.low, p.high, draws)
        elif distribution == "normal":
            sigma = max(p.high - p.nominal, p.nominal - p.low) / 3
            out[n] = np.clip(rng.normal(p.nominal, sigma, draws), p.low, p.high)
        else:
            raise ValueError(f"unknown distribution {distribution!r}")
    return out


def analyze(circuit: Circuit, measurement: str, *, draws: int = DEFAULT_DRAWS, seed: int = 1,
            distribution: str = "uniform", window: tuple[float | None, float | None] | None = None,
            unit: str = "Hz") -> Derivation:
    """Worst case over every tolerance corner and a seeded Monte Carlo run of one output.

    Parameters
    ----------
    circuit : Circuit
    measurement : str
        ``frequency`` or (timer only) ``duty_cycle``.
    draws, seed, distribution
        Monte Carlo size (>= 10⁴), generator seed, part distribution.
    window : (low, high), optional
        An explicitly given acceptance window (in the measurement's SI unit); the yield inside it is
        reported.

    Raises
    ------
    ValueError
        An output the topology does not give, too many toleranced parts, or no solution.

    References
    ----------
    JCGM 101:2008, Evaluation of measurement data - Supplement 1 to the GUM - Propagation of
    distributions using a Monte Carlo method: the seeded draws through the circuit model and the
    0.135 % / 99.865 % points as a probabilistically symmetric coverage interval (from memory).
    The worst case over every tolerance corner (extreme-value analysis of a monotonic model) is
    common practice, no single source. See docs/references.md.
    """
    info = TOPOLOGIES[circuit.topology]
    if measurement not in info["outputs"]:
        raise ValueError(f"{circuit.topology} gives {', '.join(info['outputs'])}, not {measurement}")
    key = info["outputs"][measurement]
    scale = output_scale(measurement)
    if not MIN_DRAWS <= draws <= MAX_DRAWS:
        raise ValueError(f"Monte Carlo needs {MIN_DRAWS} to {MAX_DRAWS} draws, got {draws}")
    nominal_vals = {n: np.array([p.nominal]) for n, p in circuit.parts.items()}
    nom_out = evaluate(circuit, nominal_vals)
    if key not in nom_out:  # e.g. a low-pass filter has no lower cut-off
        raise ValueError(f"{circuit.describe()} gives {', '.join(k for k in info['outputs'] if info['outputs'][k] in nom_out)}"
                         f", not {measurement}")
    nominal = float(nom_out[key][0]) * scale
    cvals, varied, bits = _corner_values(circuit)
    cout = evaluate(circuit, cvals)
    y = cout[key] * scale
    if not (math.isfinite(nominal) and np.all(np.isfinite(y))):
        raise ValueError(f"{circuit.describe()}: no {measurement} found for some tolerance corners")
    i_lo, i_hi = int(np.argmin(y)), int(np.argmax(y))

    def corner(i: int) -> dict[str, str]:
        return {n: ("+" if bits[i, j] else "-") for j, n in enumerate(varied)}

    low, high = float(y[i_lo]), float(y[i_hi])
    gain_nom = gain_worst = None
    if "gain_needed" in cout:
        gain_nom = float(nom_out["gain_needed"][0])
        gain_worst = float(np.max(cout["gain_needed"]))
    mvals = draw(circuit, draws, seed, distribution)
    mout = evaluate(circuit, mvals)
    ym = mout[key] * scale
    ym = ym[np.isfinite(ym)]
    mc: dict[str, Any] = {
        "draws": draws, "seed": seed, "distribution": distribution,
        "mean": float(np.mean(ym)), "std": float(np.std(ym, ddof=1)),
        "min": float(np.min(ym)), "max": float(np.max(ym)),
        "p0_135": float(np.percentile(ym, 0.135)), "p99_865": float(np.percentile(ym, 99.865)),
        "yield": None, "yield_u": None,
    }
    if "gain_needed" in mout:
        mc["gain_needed_p99_865"] = float(np.nanpercentile(mout["gain_needed"], 99.865))
    if window is not None:
        lo_w, hi_w = window
        inside = np.ones(ym.shape, bool)
        if lo_w is not None:
            inside &= ym >= lo_w
        if hi_w is not None:
            inside &= ym <= hi_w
        yl = float(np.mean(inside))
        mc["yield"] = yl
        mc["yield_u"] = math.sqrt(max(yl * (1 - yl), 1.0 / len(ym)) / len(ym))
    widened = False
    if mc["min"] < low or mc["max"] > high:  # not expected for monotonic circuits; be safe
        low, high, widened = min(low, mc["min"]), max(high, mc["max"]), True
    return Derivation(measurement, unit, nominal, low, high, 2 ** len(varied), corner(i_lo), corner(i_hi),
                      gain_nom, gain_worst, mc, widened)


def widen(low: float, high: float, margin: Tolerance | None) -> tuple[float, float]:
    """The window grown by ``margin``: relative margins scale each limit outward."""
    if margin is None:
        return low, high
    if margin.relative:
        return low - abs(low) * margin.minus, high + abs(high) * margin.plus
    return low - margin.minus, high + margin.plus


def derived_window(circuit: Circuit, d: Derivation, *, margin: Tolerance | None = None,
                   given: Window | None = None, decision: str | None = None) -> Window:
    """The check's window: the worst case (widened by ``margin``), or ``given`` with the
    derivation attached as details."""
    lo, hi = widen(d.low, d.high, margin)
    what = circuit.describe()
    corner_text = (f"worst case over {d.corners} tolerance corners"
                   + (f", margin {margin}" if margin is not None else "")
                   + (" (widened to the Monte Carlo extremes)" if d.widened_by_mc else ""))
    details: dict[str, Any] = {
        "topology": circuit.topology,
        "options": dict(circuit.options),
        "formula": TOPOLOGIES[circuit.topology]["formula"],
        "parts": {n: {"nominal": p.nominal, "unit": p.unit, "tolerance": str(p.tolerance)}
                  for n, p in circuit.parts.items()},
        "corners": d.corners,
        "worst_case": [d.low, d.high],
        "low_corner": d.low_corner,
        "high_corner": d.high_corner,
        "margin": None if margin is None else str(margin),
        "gain_needed": None if d.gain_nominal is None else {"nominal": d.gain_nominal,
                                                            "worst": d.gain_worst},
        "monte_carlo": d.monte_carlo,
    }
    if given is not None:
        wc = f"{format_quantity(d.low, d.unit)} … {format_quantity(d.high, d.unit)}"
        return Window(unit=given.unit, low=given.low, high=given.high,
                      nominal=given.nominal if given.nominal is not None else d.nominal,
                      derived_from=f"{given.derived_from}; design {what}: {corner_text} gives {wc}",
                      decision=decision, details=details)
    return Window(unit=d.unit, low=lo, high=hi, nominal=d.nominal,
                  derived_from=f"{what}: {corner_text}", decision=decision, details=details)
