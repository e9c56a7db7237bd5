"""The Owl Hollow boards, and units drawn from them.

A :class:`Board` lists its parts with nominal values and tolerances (the TB-3, WO-1 and PF-2
oscillators, and the AA-1 amplifier and LP-2 filter that the generator drives); :func:`draw_unit` draws one unit's values within tolerance,
seeded by a stable hash of its serial number (same serial, same parts), and applies a defect.
A :class:`Unit` builds the circuit simulation from its parts and answers, for times since
power-on: the board's output node, the fixture test point, and the supply current.
"""

from __future__ import annotations

import hashlib
import math
from collections.abc import Mapping
from dataclasses import dataclass, field
from types import MappingProxyType

import numpy as np

from benchgate.errors import SimError
from benchgate.sim.circuits import astable, rc_ladder, stimulated, wien
from benchgate.sim.circuits.trace import LoopTrace

#: the oscillators' defects (TB-3, WO-1), and every defect the simulator knows
OSCILLATOR_DEFECTS = ("wrong_capacitor", "low_gain", "high_gain", "open_section", "supply_noise", "intermittent")
DEFECTS = (*OSCILLATOR_DEFECTS, "wrong_gain_resistor", "open_coupling", "rail_clipping")
#: boards driven by the generator (their output is a response, not an oscillation)
STIMULATED = ("aa1", "lp2")
#: quiescent supply current of the stimulated boards (A): op-amp and bias network
QUIESCENT = {"aa1": 6e-3, "lp2": 2.5e-3}
#: output swing of the AA-1 stage about its bias (V peak), and with a rail clipping fault
AA1_SWING, AA1_FAULT_SWING = 4.5, 1.5

#: simulation steps per second for the oscillator models (~100 steps a period at 1 kHz)
SIM_RATE = 100_000.0
OPEN_CAPACITOR = 2e-12  # an open capacitor leaves its stray capacitance
OPEN_RESISTOR = 1e9



@dataclass(frozen=True)
class Part:
    nominal: float
    tolerance: float  # relative half-width of the band (0.05 = ±5 %)
    unit: str


@dataclass(frozen=True)
class Board:
    model: str  # "tb3"
    name: str  # "TB-3 tone board"
    supply: float  # V
    parts: Mapping[str, Part]
    defects: tuple[str, ...]  # the defects that mean something for this board
    coupling: str  # "ac" (fixture couples to the ADC mid-rail) or "dc"
    test_point_gain: float  # fixture divider from the output node to the test point
    bias: float  # the output node's DC level when powered (V)


def _parts(**kw: tuple[float, float, str]) -> Mapping[str, Part]:
    return MappingProxyType({k: Part(*v) for k, v in kw.items()})


BOARDS: dict[str, Board] = {
    "tb3": Board(
        "tb3", "TB-3 tone board", 9.0,
        _parts(R1=(6.8e3, 0.05, "Ω"), R2=(6.8e3, 0.05, "Ω"), R3=(6.8e3, 0.05, "Ω"),
               C1=(10e-9, 0.10, "F"), C2=(10e-9, 0.10, "F"), C3=(10e-9, 0.10, "F"),
               gain=(40.0, 0.04, ""), Rc=(1.0e3, 0.05, "Ω"), Rin=(47e3, 0.10, "Ω")),
        OSCILLATOR_DEFECTS, "ac", 0.36, 4.6),
    "wo1": Board(
        "wo1", "WO-1 Wien-bridge oscillator", 12.0,
        _parts(R1=(16e3, 0.01, "Ω"), R2=(16e3, 0.01, "Ω"), C1=(10e-9, 0.05, "F"),
               C2=(10e-9, 0.05, "F"), Rf=(21e3, 0.01, "Ω"), Rg=(10e3, 0.01, "Ω"),
               Rd=(15e3, 0.05, "Ω")),
        OSCILLATOR_DEFECTS, "ac", 1.0, 6.0),
    "pf2": Board(
        "pf2", "PF-2 pulse board", 9.0,
        _parts(R1=(1e3, 0.05, "Ω"), R2=(6.8e3, 0.05, "Ω"), C=(100e-9, 0.10, "F")),
        ("wrong_capacitor", "supply_noise", "intermittent"), "dc", 1.0 / 3.0, 0.0),
    "aa1": Board(
        "aa1", "AA-1 audio amplifier", 12.0,
        _parts(Cin=(220e-9, 0.10, "F"), Rb=(33e3, 0.05, "Ω"), Rf=(22e3, 0.01, "Ω"), Rg=(2.2e3, 0.01, "Ω"),
               Rt=(1.5e3, 0.05, "Ω"), Ct=(10e-9, 0.10, "F")),
        ("wrong_capacitor", "wrong_gain_resistor", "open_coupling", "rail_clipping"), "ac", 1.0, 0.0),
    "lp2": Board(
        "lp2", "LP-2 active low-pass filter", 9.0,
        _parts(Cin=(1e-6, 0.10, "F"), Rb=(100e3, 0.05, "Ω"), R1=(11e3, 0.01, "Ω"), R2=(11e3, 0.01, "Ω"),
               C1=(22e-9, 0.05, "F"), C2=(10e-9, 0.05, "F")),
        ("wrong_capacitor", "open_coupling"), "ac", 1.0, 0.0),
}


def get_board(model: str) -> Board:
    key = str(model).lower().replace("-", "").replace("_", "")
    if key not in BOARDS:
        raise SimError(f"unknown board {model!r}; choose one of {', '.join(BOARDS)}")
    return BOARDS[key]


def serial_seed(serial: str) -> int:
    """A stable 64-bit seed from a serial number (SHA-256, not Python's salted hash)."""
    return int.from_bytes(hashlib.sha256(str(serial).encode("utf-8")).digest()[:8], "big")


@dataclass(frozen=True)
class Unit:
    """One unit under test: its board, serial, drawn part values and defect."""

    board: Board
    serial: str
    values: Mapping[str, float]
    defect: str | None = None
    seed: int = 0
    _cache: dict = field(default_factory=dict, compare=False, repr=False)

    # -- the circuit ------------------------------------------------------------------------
    def circuit(self):
        """The circuit parameters (LadderParams, WienParams or AstableParams)."""
        if "circuit" not in self._cache:
            self._cache["circuit"] = self._circuit()
        return self._cache["circuit"]

    def _circuit(self):
        v = self.values
        if self.board.model == "tb3":
            return rc_ladder.LadderParams(
                r=(v["R1"], v["R2"], v["R3"]), c=(v["C1"], v["C2"], v["C3"]), gain=v["gain"],
                r_out=v["Rc"], r_in=v["Rin"], supply=self.board.supply, bias=self.board.bias,
                bias_current=0.2e-3)
        if self.board.model == "wo1":
            return wien.WienParams(r1=v["R1"], r2=v["R2"], c1=v["C1"], c2=v["C2"], rf=v["Rf"],
                                   rg=v["Rg"], rd=v["Rd"], supply=self.board.supply)
        if self.board.model == "aa1":
            swing = AA1_FAULT_SWING if self.defect == "rail_clipping" else AA1_SWING
            return stimulated.AmplifierParams(cin=v["Cin"], rb=v["Rb"], rf=v["Rf"], rg=v["Rg"], rt=v["Rt"],
                                              ct=v["Ct"], swing=swing)
        if self.board.model == "lp2":
            return stimulated.FilterParams(cin=v["Cin"], rb=v["Rb"], r1=v["R1"], r2=v["R2"], c1=v["C1"],
                                           c2=v["C2"])
        return astable.AstableParams(r1=v["R1"], r2=v["R2"], c=v["C"], supply=self.board.supply)

    @property
    def stimulated(self) -> bool:
        """True for a board driven by the generator (see :func:`respond`)."""
        return self.board.model in STIMULATED

    def respond(self, drive: stimulated.Drive | None, t0: float, rate: float, n: int,
                swing_scale: float = 1.0) -> tuple[np.ndarray, np.ndarray]:
        """Input and output (V) of a stimulated board at ``t0 + k/rate`` (bench time), for the
        generator's ``drive``; ``swing_scale`` scales the output swing with a sagging supply."""
        p = self.circuit()
        if swing_scale != 1.0 and isinstance(p, stimulated.AmplifierParams):
            from dataclasses import replace

            p = replace(p, swing=p.swing * swing_scale)
        return stimulated.respond(p, drive, t0, rate, n)

    def _trace(self) -> LoopTrace | None:
        if self.board.model == "pf2" or self.stimulated:
            return None
        if "trace" not in self._cache:
            p = self.circuit()
            module = rc_ladder if self.board.model == "tb3" else wien
            step = module.stepper(p, SIM_RATE, seed=self.seed & 0xFFFFFFFF)
            self._cache["trace"] = LoopTrace(step, 1000.0)
        return self._cache["trace"]

    def node(self, tau: np.ndarray) -> np.ndarray:
        """The board's output node (V) at ``tau`` s after power-on (continuously powered)."""
        tau = np.asarray(tau, dtype=np.float64)
        if self.stimulated:  # nothing oscillates: the output is a response (see respond)
            return np.zeros(tau.shape)
        trace = self._trace()
        if trace is None:
            return astable.output(self.circuit(), tau)
        return trace.values(tau)

    def steady_frequency(self) -> float | None:
        if self.stimulated:
            return None
        trace = self._trace()
        return self.circuit().frequency if trace is None else trace.steady_frequency

    def current(self, tau: np.ndarray) -> np.ndarray:
        """Supply current (A) at ``tau`` s after power-on (continuously powered)."""
        tau = np.asarray(tau, dtype=np.float64)
        if self.stimulated:
            return np.full(tau.shape, QUIESCENT[self.board.model])
        p = self.circuit()
        if self.board.model == "pf2":
            return astable.supply_current(p, tau)
        module = rc_ladder if self.board.model == "tb3" else wien
        return module.supply_current(p, self.node(tau))

    def mean_draw(self) -> float:
        """Mean supply current (A) once running (over 0.4–0.5 s after power-on), cached."""
        if "mean_draw" not in self._cache:
            self._cache["mean_draw"] = float(np.mean(self.current(np.linspace(0.4, 0.5, 2001))))
        return self._cache["mean_draw"]

    # -- defects acting over time -----------------------------------------------------------
    def dropouts(self, horizon: float) -> np.ndarray:
        """For an ``intermittent`` unit: (start, end) pairs, in seconds after power-on, when
        its output connector loses contact (the circuit keeps running; the test point sees
        nothing). Drawn from the serial: 5–20 ms losses every 40–120 ms."""
        if self.defect != "intermittent":
            return np.empty((0, 2))
        key = int(np.ceil(horizon))
        cached = self._cache.get("dropouts")
        if cached is not None and cached[0] >= key:
            return cached[1]
        rng = np.random.default_rng(self.seed ^ 0x5EED)
        out, t = [], float(rng.uniform(0.03, 0.08))
        while t < key:
            d = float(rng.uniform(0.005, 0.02))
            out.append((t, t + d))
            t += d + float(rng.uniform(0.04, 0.12))
        drops = np.asarray(out).reshape(-1, 2)
        self._cache["dropouts"] = (key, drops)
        return drops

    def connected(self, tau: np.ndarray) -> np.ndarray:
        """Whether the output is connected at ``tau`` s after power-on."""
        tau = np.asarray(tau, dtype=np.float64)
        drops = self.dropouts(float(np.max(tau, initial=0.0)) + 1.0)
        if drops.size == 0:
            return np.ones(tau.shape, dtype=bool)
        k = np.searchsorted(drops[:, 0], tau, side="right") - 1
        return ~((k >= 0) & (tau < drops[np.maximum(k, 0), 1]))

    def test_point(self, tau: np.ndarray, rng: np.random.Generator | None = None) -> np.ndarray:
        """Fixture test-point voltage (V) at ``tau`` s after power-on: AC part of the output
        through the divider (AC-coupled boards) or the divided output (DC-coupled)."""
        tau = np.asarray(tau, dtype=np.float64)
        connected = self.connected(tau)
        node = self.node(tau)
        b = self.board
        level = np.where(connected, node - b.bias if b.coupling == "ac" else node, 0.0)
        tp = b.test_point_gain * level
        if self.defect == "supply_noise":
            tp = tp + 0.15 * np.sin(2 * math.pi * 100.0 * tau)
            if rng is not None:
                tp = tp + rng.normal(0.0, 0.05, size=tau.shape)
        return tp

    def rail_ripple(self, tau: np.ndarray) -> np.ndarray:
        tau = np.asarray(tau, dtype=np.float64)
        if self.defect == "supply_noise":
            return 0.3 * np.sin(2 * math.pi * 100.0 * tau)
        return np.zeros(tau.shape)

    def draw(self, tau: np.ndarray) -> np.ndarray:
        """Supply current (A) at ``tau`` s after power-on."""
        return self.current(tau)


def _apply_defect(board: Board, values: dict[str, float], defect: str, rng: np.random.Generator) -> None:
    m = board.model
    if m in STIMULATED:
        _stimulated_defect(m, values, defect)
        return
    if defect == "wrong_capacitor":
        caps = sorted(k for k in values if k.startswith("C"))
        values[caps[int(rng.integers(len(caps)))]] *= 2.2  # e.g. 22n fitted for 10n
    elif defect == "low_gain":
        if m == "tb3":
            values["gain"] *= 0.6
        else:
            values["Rf"] *= 0.9  # gain 2.9 < 3
    elif defect == "high_gain":
        if m == "tb3":
            values["gain"] *= 5.0
        else:
            values["Rf"] *= 1.12  # gain 3.35: the diodes compress hard
    elif defect == "open_section":
        if m == "tb3":
            values[f"C{int(rng.integers(1, 4))}"] = OPEN_CAPACITOR
        else:
            values["R1"] = OPEN_RESISTOR


def _stimulated_defect(model: str, values: dict[str, float], defect: str) -> None:
    """The AA-1 and LP-2 faults: a capacitor of ten (AA-1 tone) or 2.2 (LP-2 C2) times its
    value, a gain resistor of 1k0 fitted for 2k2, an open input coupling capacitor (its stray
    capacitance left), and a rail clipping fault (the AA-1 output swing cut to 1.5 V, applied in
    :meth:`Unit.circuit`)."""
    if defect == "wrong_capacitor":
        if model == "aa1":
            values["Ct"] *= 10.0  # 100n fitted for 10n: the tone filter cuts at a tenth
        else:
            values["C2"] *= 2.2  # 22n fitted for 10n: lower f0, lower Q
    elif defect == "wrong_gain_resistor":
        values["Rg"] = 1.0e3  # 1k0 for 2k2: gain 23 instead of 11
    elif defect == "open_coupling":
        values["Cin"] = OPEN_CAPACITOR


def draw_unit(board: str | Board, serial: str, defect: str | None = None) -> Unit:
    """Draw one unit's part values within tolerance, seeded by its serial number.

    Values are normal about the nominal with σ = tolerance/3, kept inside the tolerance band.
    Raises SimError for an unknown board, an unknown defect, or a defect that means nothing
    for this board (e.g. open_section on the PF-2, which has no sections).
    """
    b = board if isinstance(board, Board) else get_board(board)
    if defect is not None and defect not in DEFECTS:
        raise SimError(f"unknown defect {defect!r}; choose one of {', '.join(DEFECTS)}")
    if defect is not None and defect not in b.defects:
        raise SimError(f"defect {defect!r} means nothing for the {b.name}; "
                       f"it can have: {', '.join(b.defects)}")
    seed = serial_seed(serial)
    rng = np.random.default_rng(seed)
    values = {}
    for name, part in b.parts.items():
        z = float(np.clip(rng.normal(0.0, 1.0 / 3.0), -1.0, 1.0))
        values[name] = part.nominal * (1.0 + part.tolerance * z)
    if defect is not None:
        _apply_defect(b, values, defect, np.random.default_rng(seed ^ 0xDEFEC7))
    return Unit(b, str(serial), MappingProxyType(values), defect, seed)
