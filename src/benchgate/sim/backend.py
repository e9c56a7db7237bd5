"""The simulated unit on the understudy bench, and what the emulated SCPI instruments see of it.

:class:`BenchState` is shared by the virtual ADC and the SCPI backend: the unit under test, the
emulated supply's settings, the ADC board's fixture-power relay and the history of power-on
and power-off instants in bench-clock time. A unit is powered while the supply output is on or
the fixture relay is closed; its waveform runs from the instant it was powered.

:class:`BoardBackend` implements :class:`~benchgate.sim.interfaces.ScpiBackend` on that state:
the supply delivers the unit's draw up to its current limit (in limit the voltage sags; below
60 % of the board's supply the unit stops oscillating), the DMM reads the rail (DC), the test
point (AC rms) and the draw (DC current), the counter counts the test point's cycles over a
0.1 s gate (0 Hz when it does not oscillate) and the digitizer captures the test point in volts.
The circuits are simulated at the board's nominal supply; another supply voltage scales the
unit's output and current in proportion (a first-order model of a resistive, linear board).
"""

from __future__ import annotations

import threading

import numpy as np

from benchgate.clock import Clock, SystemClock
from benchgate.errors import SimError
from benchgate.sim.boards import Unit
from benchgate.sim.circuits.stimulated import Drive

BROWN_OUT = 0.6  # fraction of the nominal supply below which the unit does not run
DMM_NOISE = 50e-6  # V rms on DC readings
AVERAGE = 0.02  # s over which the supply and DMM average the current
GATE = 0.1  # s counter gate and AC-rms span
HISTORY = 32  # power intervals remembered
SOURCE_OHMS = 50.0  # the emulated generator's output resistance


class BenchState:
    """The unit under test with its power, on the bench clock. Thread-safe."""

    def __init__(self, unit: Unit, clock: Clock | None = None, *, seed: int = 0):
        self.clock = clock or SystemClock()
        self.unit = unit
        self.voltage = 0.0
        self.current_limit = 0.1
        self.output = False
        self.relay = False
        self._lock = threading.RLock()
        self._on: list[float] = []  # power-on instants
        self._off: list[float] = []  # matching power-off instants (inf while on)
        self.rng = np.random.default_rng(seed)
        self.generator: dict | None = None  # the emulated generator's settings, when it has any
        self.generator_since = 0.0  # bench time of its last change

    # -- power ------------------------------------------------------------------------------
    @property
    def powered(self) -> bool:
        return (self.output and self.voltage > 0) or self.relay

    def _update(self, was: bool) -> None:
        now = self.clock.monotonic()
        if self.powered and not was:
            self._on.append(now)
            self._off.append(np.inf)
            del self._on[:-HISTORY], self._off[:-HISTORY]
        elif was and not self.powered:
            self._off[-1] = now

    def set_supply(self, voltage: float, current_limit: float, output: bool) -> None:
        with self._lock:
            was = self.powered
            self.voltage, self.current_limit, self.output = float(voltage), float(current_limit), bool(output)
            self._update(was)

    def set_relay(self, on: bool) -> None:
        with self._lock:
            was = self.powered
            self.relay = bool(on)
            self._update(was)

    def load_unit(self, unit: Unit) -> None:
        """Swap the unit under test; if power is on, the new unit is powered from now."""
        with self._lock:
            self.unit = unit
            self._on.clear()
            self._off.clear()
            if self.powered:
                self._on.append(self.clock.monotonic())
                self._off.append(np.inf)

    def set_generator(self, settings: dict) -> None:
        with self._lock:
            self.generator = dict(settings)
            self.generator_since = self.clock.monotonic()

    def drive(self) -> Drive | None:
        """The generator's sine at the unit's input (its 50 Ω source into the board's bias
        resistor; a load setting of R_L makes the generator raise its EMF by (R_L + 50)/R_L, as
        real ones do), or None while its output is off."""
        with self._lock:
            g, since = self.generator, self.generator_since
        if not g or not g.get("output"):
            return None
        if g.get("waveform", "sine") != "sine":
            raise SimError(f"the simulated {self.unit.board.name} is driven with a sine only")
        load = g.get("load")
        emf = float(g["vpp"]) / 2.0 * ((load + SOURCE_OHMS) / load if load else 1.0)
        r_in = float(self.unit.values.get("Rb", 1e9))
        at_input = r_in / (r_in + SOURCE_OHMS)
        offset = float(g.get("offset", 0.0)) * ((load + SOURCE_OHMS) / load if load else 1.0) * at_input
        return Drive(float(g["frequency"]), emf * at_input, offset, since)

    def stimulus_response(self, t0: float, rate: float, n: int) -> tuple[np.ndarray, np.ndarray]:
        """Input and output (V) of a stimulated unit at ``t0 + k/rate``: the output is 0 while
        the unit is unpowered, and its capacitors start discharged at the later of the power-on
        and the generator's last change."""
        times = t0 + np.arange(int(n)) / float(rate)
        drive = self.drive()
        if drive is None:
            return np.zeros(times.shape), np.zeros(times.shape)
        phase = 2 * np.pi * drive.frequency * (times - drive.since)
        u = np.where(times >= drive.since, drive.amplitude * np.sin(phase) + drive.offset, 0.0)
        if not self.unit.stimulated:  # an oscillator board has no input to respond with
            return u, np.zeros(times.shape)
        tau = self._tau(times)
        live = ~np.isnan(tau)
        y = np.zeros(times.shape)
        scale = self.supply_scale()
        if live.any() and scale >= BROWN_OUT:
            k = int(np.argmax(live))
            powered_at = float(times[k] - tau[k])
            since = max(drive.since, powered_at)
            d = Drive(drive.frequency, drive.amplitude, drive.offset, since, drive.since)
            stop = k + int(np.argmin(live[k:])) if not live[k:].all() else int(n)
            k = max(k, int(np.searchsorted(times, since - 1e-12)))  # nothing before the setting
            if k < stop:
                y[k:stop] = self.unit.respond(d, float(times[k]), rate, stop - k, swing_scale=scale)[1]
        return u, y

    # -- what the unit does -----------------------------------------------------------------
    def _tau(self, times: np.ndarray) -> np.ndarray:
        """Seconds since the unit was powered at each bench time (NaN while unpowered)."""
        with self._lock:
            on, off = np.asarray(self._on), np.asarray(self._off)
        times = np.asarray(times, dtype=np.float64)
        if on.size == 0:
            return np.full(times.shape, np.nan)
        k = np.searchsorted(on, times, side="right") - 1
        kk = np.maximum(k, 0)
        live = (k >= 0) & (times < off[kk])
        return np.where(live, times - on[kk], np.nan)

    def supply_scale(self) -> float:
        """Voltage at the unit relative to the board's nominal supply (sag in current limit)."""
        with self._lock:
            if not self.powered:
                return 0.0
            nominal = self.unit.board.supply
            v = self.voltage if self.output and self.voltage > 0 else nominal
            scale = v / nominal
            if self.output and self.voltage > 0:
                demand = self.unit.mean_draw() * scale
                if demand > self.current_limit:
                    scale *= self.current_limit / demand if demand > 0 else 0.0
            return scale

    def _raw_current(self, scale: float) -> float:
        """Mean draw (A) over the last AVERAGE seconds at ``scale`` × nominal supply (a resistive
        unit: current proportional to voltage)."""
        now = self.clock.monotonic()
        tau = self._tau(np.linspace(now - AVERAGE, now, 200))
        ok = ~np.isnan(tau)
        if not ok.any():
            tau = np.zeros(1)
            ok = np.ones(1, dtype=bool)
        return float(np.mean(self.unit.draw(tau[ok]))) * scale

    def current(self) -> float:
        """The unit's draw now (A), already limited by the supply's current limit."""
        with self._lock:
            if not self.powered:
                return 0.0
            if self.output and self.voltage > 0:
                if self.unit.mean_draw() * self.voltage / self.unit.board.supply > self.current_limit:
                    return self.current_limit  # constant-current mode
                return min(self._raw_current(self.voltage / self.unit.board.supply), self.current_limit)
            return self._raw_current(1.0)

    def rail_voltage(self) -> float:
        with self._lock:
            return self.supply_scale() * self.unit.board.supply

    def test_point(self, times: np.ndarray, *, noise: bool = True) -> np.ndarray:
        """Fixture test-point voltage (V) at bench-clock ``times``: 0 while unpowered."""
        times = np.asarray(times, dtype=np.float64)
        if self.unit.stimulated:  # the output of a driven board, on a uniform grid of times
            return self.stimulus_response(*_grid(times))[1]
        tau = self._tau(times)
        scale = self.supply_scale()
        live = ~np.isnan(tau)
        out = np.zeros(times.shape)
        if live.any() and scale >= BROWN_OUT:
            out[live] = scale * self.unit.test_point(tau[live], self.rng if noise else None)
        return out

    def rail(self, times: np.ndarray) -> np.ndarray:
        """The unit's supply rail (V) at bench-clock ``times``, ripple included."""
        times = np.asarray(times, dtype=np.float64)
        tau = self._tau(times)
        live = ~np.isnan(tau)
        out = np.zeros(times.shape)
        if live.any():
            out[live] = self.rail_voltage() + self.unit.rail_ripple(tau[live])
        return out


def _grid(times: np.ndarray) -> tuple[float, float, int]:
    """(start, rate, count) of uniformly spaced ``times``; SimError when they are not."""
    if times.size < 2:
        return (float(times[0]) if times.size else 0.0), 1.0, int(times.size)
    step = float(times[1] - times[0])
    if not step > 0 or not np.allclose(np.diff(times), step, rtol=1e-6, atol=0):
        raise SimError("a driven board is sampled on a uniform grid of times only")
    return float(times[0]), 1.0 / step, int(times.size)


def count_frequency(v: np.ndarray, rate: float, *, min_pp: float = 0.05) -> float:
    """Reciprocal counting: cycles between the first and last rising edges (with hysteresis of
    10 % of the span about the mid level) divided by the time between them; 0.0 if the signal's
    span is below ``min_pp`` volts or fewer than two edges fall in the capture."""
    v = np.asarray(v, dtype=np.float64)
    lo, hi = float(v.min()), float(v.max())
    if hi - lo < min_pp:
        return 0.0
    mid, hyst = 0.5 * (lo + hi), 0.1 * (hi - lo)
    state = np.where(v > mid + hyst, 1, np.where(v < mid - hyst, -1, 0))
    idx = np.nonzero(state)[0]
    if idx.size < 2:
        return 0.0
    s = state[idx]
    edges = idx[1:][(s[:-1] < 0) & (s[1:] > 0)]  # first sample above after being below
    if edges.size < 2:
        return 0.0
    c = v - mid
    ups = np.nonzero((c[:-1] <= 0) & (c[1:] > 0))[0]
    j = ups[np.searchsorted(ups, edges, side="right") - 1]  # last mid crossing before each edge
    t = (j + c[j] / (c[j] - c[j + 1])) / rate
    return float((edges.size - 1) / (t[-1] - t[0]))


class BoardBackend:
    """:class:`~benchgate.sim.interfaces.ScpiBackend` on a :class:`BenchState`."""

    def __init__(self, state: BenchState, *, counter_ppm: float = 0.5, digitizer_noise: float = 0.3e-3):
        self.state = state
        self.counter_ppm = counter_ppm
        self.digitizer_noise = digitizer_noise

    def _now(self) -> float:
        return self.state.clock.monotonic()

    def supply_changed(self, voltage: float, current_limit: float, output: bool) -> None:
        self.state.set_supply(voltage, current_limit, output)

    def supply_current(self) -> float:
        return self.state.current() if self.state.output else 0.0

    def supply_voltage(self) -> float:
        s = self.state
        if not (s.output and s.voltage > 0):
            return 0.0
        return s.rail_voltage()

    def dmm_dc_voltage(self) -> float:
        return self.state.rail_voltage() + float(self.state.rng.normal(0.0, DMM_NOISE))

    def dmm_ac_voltage(self) -> float:
        now = self._now()
        v = self.state.test_point(np.linspace(now - GATE, now, 20_000))
        return float(np.sqrt(np.mean(np.square(v - v.mean()))))

    def dmm_dc_current(self) -> float:
        return self.state.current() + float(self.state.rng.normal(0.0, 1e-6))

    def counter_frequency(self) -> float:
        now = self._now()
        rate = 200_000.0
        v = self.state.test_point(now - GATE + np.arange(int(GATE * rate)) / rate, noise=False)
        f = count_frequency(v, rate)
        return f * (1.0 + float(self.state.rng.normal(0.0, self.counter_ppm * 1e-6))) if f else 0.0

    def generator_changed(self, settings: dict) -> None:
        self.state.set_generator(settings)

    def digitizer_channels_at(self, start: float, rate: float, points: int,
                              channels: tuple[str, ...]) -> np.ndarray:
        """Several channels at the same instants, shape (points, channels): an instrument channel
        called ``IN`` is the unit's input (what the generator delivers), any other its output."""
        u, y = self.state.stimulus_response(start, rate, points)
        if not self.state.unit.stimulated:
            y = self.state.test_point(start + np.arange(int(points)) / float(rate))
        cols = [u if c.strip().upper() == "IN" else y for c in channels]
        noisy = [c + self.state.rng.normal(0.0, self.digitizer_noise, size=c.shape) for c in cols]
        return np.column_stack(noisy)

    def digitizer_record(self, rate: float, points: int) -> np.ndarray:
        return self.digitizer_record_at(self._now(), rate, points)

    def digitizer_record_at(self, start: float, rate: float, points: int) -> np.ndarray:
        """``points`` samples of the test point from bench time ``start`` at ``rate`` Hz (V)."""
        t = start + np.arange(int(points)) / float(rate)
        v = self.state.test_point(t)
        return v + self.state.rng.normal(0.0, self.digitizer_noise, size=v.shape)
