"""The virtual ADC: coupling, quantisation, clipping, clock error, power-on in bench time."""

from __future__ import annotations

import numpy as np
import pytest

from benchgate.clock import ManualClock
from benchgate.sim.adc import RAIL_DIVIDER, VirtualAdc
from benchgate.sim.backend import BenchState
from benchgate.sim.boards import draw_unit


def make(board="tb3", defect=None, **kw):
    clock = ManualClock(100.0)
    state = BenchState(draw_unit(board, "ADC-1", defect), clock)
    return clock, state, VirtualAdc(state, **kw)


class TestQuantiser:
    def test_codes_round_and_clip_at_the_rails(self):
        _, _, adc = make()
        v = np.array([-0.5, 0.0, 3.3 / 4096 * 0.49, 3.3 / 4096 * 0.51, 1.65, 3.3, 5.0])
        # ideal N-bit quantiser, code = round(v / vref · 2^N), clipped to 0 … 2^N − 1 (IEEE 1241 model)
        assert adc.quantise(v).tolist() == [0, 0, 0, 1, 2048, 4095, 4095]

    def test_noise_free_unpowered_ac_board_sits_at_mid_rail(self):
        _, _, adc = make(noise=0.0)
        adc.start(50e3, 0b01)
        codes = adc.read(500)
        assert codes.shape == (500, 1) and codes.dtype == np.uint16
        assert np.all(codes == 2048)  # vref/2 for the AC-coupled fixture

    def test_unpowered_dc_board_reads_zero(self):
        _, _, adc = make("pf2", noise=0.0)
        adc.start(50e3, 0b11)
        assert np.all(adc.read(100) == 0)

    def test_input_noise_is_as_stated(self):
        _, _, adc = make(noise=2e-3, bits=16)
        adc.start(50e3, 1)
        v = adc.read(20_000)[:, 0] * 3.3 / 2**16
        assert np.std(v) == pytest.approx(2e-3, rel=0.05)


class TestTiming:
    def test_capture_started_before_power_on_sees_the_start_up(self):
        clock, state, adc = make(noise=0.0)
        adc.start(50e3, 1)  # at t = 100 s
        state.set_supply(9.0, 0.05, False)
        clock.advance(0.01)
        state.set_supply(9.0, 0.05, True)  # power on at 100.01 s
        codes = adc.read(15_000)[:, 0].astype(float)  # 0.3 s
        assert np.all(codes[:500] == 2048)  # flat before power-on
        early, late = np.ptp(codes[500:1500]), np.ptp(codes[-2500:])
        assert early < 0.1 * late  # grows from the start-up noise
        assert late > 1000  # ≈ 1 V peak at the test point is ±1241 codes

    def test_sample_clock_error_in_ppm(self):
        _, _, adc = make(clock_error_ppm=50.0)
        adc.start(1000.0, 1)
        t = adc.times(1001)
        # samples are really taken at rate·(1 + 50e-6)
        assert t[-1] - t[0] == pytest.approx(1.0 / (1 + 50e-6), rel=1e-12)

    def test_rail_channel_through_the_divider(self):
        clock, state, adc = make(noise=0.0)
        state.set_supply(9.0, 0.05, True)
        clock.advance(0.2)
        adc.start(50e3, 0b10)
        codes = adc.read(100)
        assert codes.shape == (100, 1)
        assert codes[:, 0] * 3.3 / 4096 == pytest.approx(np.full(100, 9.0 * RAIL_DIVIDER), abs=1e-3)

    def test_both_channels_in_mask_order(self):
        clock, state, adc = make(noise=0.0)
        state.set_supply(9.0, 0.05, True)
        clock.advance(0.2)
        adc.start(50e3, 0b11)
        codes = adc.read(50)
        assert codes.shape == (50, 2)
        assert np.all(codes[:, 1] == adc.quantise(np.full(50, 9.0 * RAIL_DIVIDER)))

    def test_fixture_relay_powers_the_unit(self):
        clock, state, adc = make(noise=0.0)
        adc.fixture_power(True)
        assert state.powered
        clock.advance(0.3)
        adc.start(50e3, 1)
        assert np.ptp(adc.read(2000)) > 1000
        adc.fixture_power(False)
        assert not state.powered
