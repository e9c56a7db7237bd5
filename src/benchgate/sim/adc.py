"""The virtual ADC of the understudy bench: a :class:`~benchgate.sim.interfaces.SampleSource`.

It samples the simulated unit in bench-clock time, from the instant acquisition starts: a
capture started before power-on sees the flat line of an unpowered unit, then the start-up.
Channel ``out`` is the fixture test point: AC-coupled boards (TB-3, WO-1) are coupled to the
ADC's mid-rail (vref/2), the DC-coupled PF-2 is read as is. Channel ``rail`` is the unit's
supply rail through a 1/4 divider. A board the generator drives (AA-1, LP-2) has channel ``in``
too: its input, AC-coupled to mid-rail like ``out``. Each sample gets input noise, is quantised to ``bits``
(code = round(v / vref · 2^bits)) and clipped at the rails; the ADC's own crystal is off by
``clock_error_ppm`` so its samples are really taken at ``rate · (1 + error)``.
"""

from __future__ import annotations

import numpy as np

from benchgate.sim.backend import BenchState, _grid

RAIL_DIVIDER = 0.25


class VirtualAdc:
    def __init__(self, state: BenchState, *, bits: int = 12, vref: float = 3.3, noise: float = 0.4e-3,
                 clock_error_ppm: float = 18.0, seed: int = 1):
        if not 1 <= int(bits) <= 16:
            raise ValueError(f"ADC bits must be 1 to 16, got {bits!r}")
        self.state = state
        self.bits = int(bits)
        self.vref = float(vref)
        self.noise = float(noise)
        self.clock_error_ppm = float(clock_error_ppm)
        # a board the generator drives has its input on a third channel (AC-coupled to mid-rail)
        self.channels: tuple[str, ...] = ("out", "rail", "in") if state.unit.stimulated else ("out", "rail")
        self._rng = np.random.default_rng(seed)
        self._rate = 1.0
        self._mask = 1
        self._t0 = 0.0
        self._index = 0

    def start(self, rate: float, channel_mask: int) -> None:
        if not rate > 0:
            raise ValueError(f"sample rate must be > 0, got {rate!r}")
        self._rate = float(rate) * (1.0 + self.clock_error_ppm * 1e-6)
        self._mask = int(channel_mask)
        self._t0 = self.state.clock.monotonic()
        self._index = 0

    def times(self, n: int) -> np.ndarray:
        return self._t0 + (self._index + np.arange(int(n))) / self._rate

    def voltages(self, channel: str, t: np.ndarray) -> np.ndarray:
        """Input voltage of ``channel`` at bench times ``t`` (before noise and quantisation)."""
        if channel == "out":
            tp = self.state.test_point(t)
            return tp + self.vref / 2.0 if self.state.unit.board.coupling == "ac" else tp
        if channel == "rail":
            return RAIL_DIVIDER * self.state.rail(t)
        if channel == "in" and "in" in self.channels:
            start, rate, n = _grid(t)
            return self.state.stimulus_response(start, rate, n)[0] + self.vref / 2.0
        raise ValueError(f"no channel {channel!r}")

    def quantise(self, v: np.ndarray) -> np.ndarray:
        top = 2**self.bits - 1
        codes = np.rint(np.asarray(v) / self.vref * 2**self.bits)
        return np.clip(codes, 0, top).astype(np.uint16)

    def read(self, n: int) -> np.ndarray:
        t = self.times(n)
        self._index += int(n)
        cols = []
        for i, name in enumerate(self.channels):
            if self._mask >> i & 1:
                v = self.voltages(name, t) + self._rng.normal(0.0, self.noise, size=t.shape)
                cols.append(self.quantise(v))
        return np.stack(cols, axis=1) if cols else np.empty((int(n), 0), dtype=np.uint16)

    def stop(self) -> None:
        pass

    def fixture_power(self, on: bool) -> None:
        self.state.set_relay(on)
