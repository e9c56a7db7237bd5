"""Board definitions and units drawn from serial numbers."""

from __future__ import annotations

import math

import numpy as np
import pytest

from benchgate.errors import BenchgateError, SimError
from benchgate.sim.boards import BOARDS, DEFECTS, OPEN_CAPACITOR, draw_unit, get_board


class TestBoards:
    def test_designs_match_the_agreed_values(self):
        tb3, wo1, pf2 = BOARDS["tb3"], BOARDS["wo1"], BOARDS["pf2"]
        assert (tb3.parts["R1"].nominal, tb3.parts["R1"].tolerance) == (6.8e3, 0.05)
        assert (tb3.parts["C3"].nominal, tb3.parts["C3"].tolerance) == (10e-9, 0.10)
        assert (wo1.parts["R2"].nominal, wo1.parts["C1"].tolerance) == (16e3, 0.05)
        assert (pf2.parts["R2"].nominal, pf2.parts["C"].nominal) == (6.8e3, 100e-9)
        # handbook formulas (REFERENCES.md): ladder 955.5 Hz, Wien 994.7 Hz, astable 988 Hz / 53.4 %
        assert 1 / (2 * math.pi * 6.8e3 * 10e-9 * math.sqrt(6)) == pytest.approx(955.5, abs=0.1)
        nominal = draw_unit("wo1", "x").circuit().__class__()
        assert nominal.frequency == pytest.approx(994.7, abs=0.1)
        p = draw_unit("pf2", "x").circuit().__class__()
        assert p.frequency == pytest.approx(988.1, abs=0.1)
        assert p.duty == pytest.approx(0.534, abs=0.001)

    def test_model_names_are_forgiving_but_unknown_ones_refused(self):
        assert get_board("TB-3") is BOARDS["tb3"]
        with pytest.raises(SimError, match="unknown board 'xx9'"):
            get_board("xx9")


class TestDrawUnit:
    def test_same_serial_same_parts(self):
        a, b = draw_unit("tb3", "OH-0042"), draw_unit("tb3", "OH-0042")
        assert dict(a.values) == dict(b.values)
        assert dict(draw_unit("tb3", "OH-0043").values) != dict(a.values)

    def test_parts_stay_inside_their_tolerance_band(self):
        board = BOARDS["tb3"]
        for i in range(200):
            u = draw_unit(board, f"SN{i}")
            for name, part in board.parts.items():
                assert abs(u.values[name] / part.nominal - 1) <= part.tolerance + 1e-12

    def test_parts_spread_within_the_band(self):
        vals = np.array([draw_unit("tb3", f"SN{i}").values["C1"] for i in range(300)]) / 10e-9 - 1
        assert 0.02 < vals.std() < 0.05  # σ = tolerance/3 = 3.3 % (common practice, no source)

    def test_wrong_capacitor_is_a_22n_for_a_10n(self):
        good, bad = draw_unit("tb3", "OH-7"), draw_unit("tb3", "OH-7", "wrong_capacitor")
        ratios = [bad.values[k] / good.values[k] for k in good.values]
        assert sorted(ratios)[-1] == pytest.approx(2.2)
        assert sorted(ratios)[:-1] == pytest.approx([1.0] * (len(ratios) - 1))

    def test_open_section_opens_a_capacitor(self):
        u = draw_unit("tb3", "OH-7", "open_section")
        assert OPEN_CAPACITOR in [u.values[k] for k in ("C1", "C2", "C3")]

    @pytest.mark.parametrize("defect", ["open_section", "low_gain", "high_gain"])
    def test_defects_meaningless_for_the_pulse_board_are_refused(self, defect):
        with pytest.raises(SimError, match=f"{defect}.*PF-2"):
            draw_unit("pf2", "P1", defect)

    def test_unknown_defect(self):
        with pytest.raises(BenchgateError, match="unknown defect 'smoke'"):
            draw_unit("tb3", "P1", "smoke")

    def test_every_defect_is_known(self):
        for board in BOARDS.values():
            assert set(board.defects) <= set(DEFECTS)


class TestUnit:
    t = np.arange(25_000) / 50e3

    def test_good_tb3_at_the_test_point(self):
        u = draw_unit("tb3", "OH-0001")
        tp = u.test_point(self.t)
        steady = tp[-5000:]
        assert 0.6 < np.ptp(steady) / 2 < 1.4  # the interfaces' amplitude window
        assert abs(steady.mean()) < 0.05  # AC-coupled
        assert 2e-3 < u.mean_draw() < 8e-3  # the interfaces' current window

    def test_pulse_board_is_dc_coupled_and_divided_by_three(self):
        u = draw_unit("pf2", "P1")
        tp = u.test_point(self.t)
        assert tp.max() == pytest.approx((9.0 - 0.05) / 3)
        assert tp.min() == pytest.approx(0.01)

    def test_intermittent_unit_loses_its_output_for_a_while(self):
        good = draw_unit("wo1", "W1")
        bad = draw_unit("wo1", "W1", "intermittent")
        drops = bad.dropouts(0.5)
        assert drops.shape[0] >= 3
        lost = ~bad.connected(self.t)
        assert lost.any() and not lost.all()
        assert np.all(bad.test_point(self.t)[lost] == 0.0)
        assert np.allclose(bad.test_point(self.t)[~lost], good.test_point(self.t)[~lost])

    def test_supply_noise_adds_ripple(self):
        good = draw_unit("tb3", "T1")
        bad = draw_unit("tb3", "T1", "supply_noise")
        diff = bad.test_point(self.t) - good.test_point(self.t)
        assert np.std(diff) > 0.05
