"""What the emulated SCPI instruments see of the simulated unit."""

from __future__ import annotations

import numpy as np
import pytest

from benchgate.clock import ManualClock
from benchgate.sim.backend import BenchState, BoardBackend, count_frequency
from benchgate.sim.boards import draw_unit


def make(board="tb3", defect=None, serial="BK-1"):
    clock = ManualClock(10.0)
    state = BenchState(draw_unit(board, serial, defect), clock)
    return clock, state, BoardBackend(state)


class TestCounting:
    def test_count_frequency_of_a_known_sine(self):
        rate = 200e3
        t = np.arange(20_000) / rate
        # reciprocal counting of an exact sine: 1234.5 Hz (common practice, no source)
        assert count_frequency(np.sin(2 * np.pi * 1234.5 * t + 0.3), rate) == pytest.approx(1234.5, rel=1e-5)

    def test_no_signal_counts_zero(self):
        assert count_frequency(np.full(1000, 0.3), 1e4) == 0.0
        assert count_frequency(1e-3 * np.sin(np.arange(1000)), 1e4) == 0.0


class TestSupply:
    def test_output_off_draws_nothing(self):
        _, state, be = make()
        be.supply_changed(9.0, 0.05, False)
        assert be.supply_current() == 0.0 and be.supply_voltage() == 0.0
        assert not state.powered

    def test_good_tb3_draws_about_4_ma(self):
        clock, _, be = make()
        be.supply_changed(9.0, 0.05, True)
        clock.advance(0.3)
        assert 2e-3 < be.supply_current() < 8e-3  # the interfaces' window, ≈ 4.6 mA here
        assert be.supply_voltage() == pytest.approx(9.0)

    def test_current_limit_holds_and_voltage_sags(self):
        clock, state, be = make()
        be.supply_changed(9.0, 0.002, True)
        clock.advance(0.3)
        assert be.supply_current() == pytest.approx(0.002)
        v = be.supply_voltage()
        # a resistive load in constant current: V = I_limit · R_load (Ohm's law)
        assert v == pytest.approx(9.0 * 0.002 / state.unit.mean_draw(), rel=1e-6)
        # sagged below 60 % of 9 V: the unit does not oscillate
        assert be.counter_frequency() == 0.0

    def test_dmm_reads_rail_test_point_and_current(self):
        clock, state, be = make()
        be.supply_changed(9.0, 0.05, True)
        clock.advance(0.4)
        assert be.dmm_dc_voltage() == pytest.approx(9.0, abs=1e-3)
        tp = state.test_point(np.linspace(clock.monotonic() - 0.1, clock.monotonic(), 20_000), noise=False)
        assert be.dmm_ac_voltage() == pytest.approx(np.std(tp), rel=0.01)
        assert be.dmm_dc_current() == pytest.approx(be.supply_current(), abs=1e-5)


class TestCounterAndDigitizer:
    def test_counter_reads_the_unit_frequency(self):
        clock, state, be = make()
        be.supply_changed(9.0, 0.05, True)
        clock.advance(0.5)
        f = be.counter_frequency()
        assert f == pytest.approx(state.unit.steady_frequency(), rel=1e-4)

    def test_counter_reads_zero_for_a_unit_that_never_starts(self):
        clock, _, be = make(defect="low_gain")
        be.supply_changed(9.0, 0.05, True)
        clock.advance(0.5)
        assert be.counter_frequency() == 0.0

    def test_counter_reads_zero_unpowered(self):
        _, _, be = make()
        assert be.counter_frequency() == 0.0

    def test_digitizer_record_in_volts(self):
        clock, state, be = make("pf2")
        be.supply_changed(9.0, 0.05, True)
        clock.advance(0.1)
        rec = be.digitizer_record(1e6, 10_000)
        assert rec.shape == (10_000,)
        assert rec.max() == pytest.approx(2.98, abs=0.01)  # 0–9 V output divided by 3
        assert rec.min() == pytest.approx(0.01, abs=0.01)

    def test_new_unit_is_powered_from_the_swap_when_power_is_on(self):
        clock, state, be = make()
        be.supply_changed(9.0, 0.05, True)
        clock.advance(0.5)
        state.load_unit(draw_unit("tb3", "BK-2"))
        t = clock.monotonic()
        early = state.test_point(np.linspace(t, t + 0.005, 500), noise=False)
        late = state.test_point(np.linspace(t + 0.4, t + 0.405, 500), noise=False)
        assert np.ptp(early) < 0.1 * np.ptp(late)  # starting up again


class TestSupplyVoltage:
    def test_lower_supply_scales_the_output_and_brown_out_stops_it(self):
        clock, state, be = make()
        be.supply_changed(9.0, 0.05, True)
        clock.advance(0.4)
        t = clock.monotonic() + np.arange(2000) / 50e3
        full = np.ptp(state.test_point(t, noise=False))
        be.supply_changed(6.0, 0.05, True)
        assert np.ptp(state.test_point(t, noise=False)) == pytest.approx(full * 6 / 9, rel=1e-9)
        be.supply_changed(4.0, 0.05, True)  # below 60 % of 9 V
        assert np.ptp(state.test_point(t, noise=False)) == 0.0
        assert be.counter_frequency() == 0.0
