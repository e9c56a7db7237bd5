"""The waveform of a simulated oscillator from power-on, extended on demand.

:class:`LoopTrace` integrates a :class:`~benchgate.sim.circuits.engine.LoopStepper` in chunks as
later times are asked for. After each chunk it checks whether the limit cycle has settled
(peak-to-peak of the last few segments of about five periods agreeing to 2e-4) or the circuit has
died out (below 1 µV); from then on the waveform is continued periodically from the last
simulated period (or held at its final value), so hour-long captures cost no more than the
start-up. Thread-safe: the serial device and the SCPI server read the same trace.
"""

from __future__ import annotations

import threading

import numpy as np

from benchgate.sim.circuits.engine import LoopStepper


class LoopTrace:
    def __init__(self, stepper: LoopStepper, nominal_frequency: float, *, max_time: float = 4.0,
                 chunk: float = 0.02):
        self.stepper = stepper
        self.rate = stepper.rate
        self.nominal_frequency = float(nominal_frequency)
        self.max_time = float(max_time)
        self._chunk = max(1, int(round(chunk * self.rate)))
        self._segment = max(8, int(round(5.0 * self.rate / self.nominal_frequency)))
        self._v = np.empty(0)
        self._lock = threading.Lock()
        self.state = "running"  # running | periodic | constant
        self.period: float | None = None
        self._t_ref = 0.0
        self._hold = 0.0
        self._check_from = 0

    # -- extension ------------------------------------------------------------------------
    @property
    def simulated(self) -> float:
        """Seconds from power-on integrated so far."""
        return self._v.size / self.rate

    def ensure(self, t_end: float) -> None:
        with self._lock:
            while self.state == "running" and self.simulated < t_end + 2.0 / self.nominal_frequency:
                self._v = np.concatenate([self._v, self.stepper.run(self._chunk)])
                self._check()

    def _check(self) -> None:
        w = self._segment
        v = self._v
        if v.size < 6 * w:
            return
        tail = v[-4 * w:].reshape(4, w)
        pp = tail.max(axis=1) - tail.min(axis=1)
        if pp[-1] < 1e-6:
            self.state, self._hold = "constant", float(v[-1])
            return
        settled = float(np.ptp(pp)) <= 2e-4 * float(pp.max())
        if not settled and self.simulated < self.max_time:
            return
        seg = v[-4 * w:]
        level = 0.5 * (seg.max() + seg.min())
        s = seg - level
        up = np.nonzero((s[:-1] <= 0) & (s[1:] > 0))[0]
        if up.size < 3 or pp[-1] < 1e-4:
            self.state, self._hold = "constant", float(v[-1])
            return
        frac = s[up] / (s[up] - s[up + 1])
        t_up = (v.size - 4 * w + up + frac) / self.rate
        self.period = float((t_up[-1] - t_up[0]) / (t_up.size - 1))
        self._t_ref = float(t_up[-1])
        self.state = "periodic"

    # -- reading --------------------------------------------------------------------------
    def values(self, tau: np.ndarray) -> np.ndarray:
        """Output voltage at ``tau`` seconds after power-on (tau ≥ 0)."""
        tau = np.asarray(tau, dtype=np.float64)
        if tau.size == 0:
            return np.empty(tau.shape)
        self.ensure(float(np.max(tau)))
        t = np.maximum(tau, 0.0)
        if self.state == "periodic":
            late = t > self._t_ref
            t = np.where(late, self._t_ref - self.period + np.mod(t - self._t_ref, self.period), t)
        pos = t * self.rate - 1.0  # sample k holds the value after step k+1
        idx = np.clip(np.floor(pos).astype(np.int64), -1, self._v.size - 2)
        frac = np.clip(pos - idx, 0.0, 1.0)
        v = self._v
        first = self._v[0] if v.size else 0.0
        lo = np.where(idx < 0, first, v[np.maximum(idx, 0)])
        hi = v[np.minimum(idx + 1, v.size - 1)]
        out = lo + (hi - lo) * frac
        if self.state == "constant":
            out = np.where(t >= self.simulated, self._hold, out)
        return out

    @property
    def steady_frequency(self) -> float | None:
        """The limit cycle's frequency (Hz) once settled, None if it does not oscillate."""
        if self.state == "running":
            self.ensure(self.max_time)
        return 1.0 / self.period if self.state == "periodic" else None
