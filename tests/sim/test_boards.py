"""Board definitions and units drawn from serial numbers."""

from __future__ import annotations

import math
from types import MappingProxyType

import numpy as np
import pytest

from benchgate.analysis import Capture, analyze
from benchgate.errors import BenchgateError, SimError
from benchgate.sim.boards import BOARDS, DEFECTS, OPEN_CAPACITOR, Unit, draw_unit, get_board


class TestBoards:
    """Each board, built from its nominal parts, oscillates where the handbook formula says
    (measured on the simulated output node, not read back from the model's parameters)."""

    @staticmethod
    def _measured(model):
        board = BOARDS[model]
        unit = Unit(board, "nominal", MappingProxyType({k: p.nominal for k, p in board.parts.items()}))
        fs = 200e3
        t = 0.3 + np.arange(int(0.1 * fs)) / fs  # well after start-up
        m = analyze(Capture(unit.node(t), fs), ["frequency", "duty_cycle"]).measurements
        assert m["frequency"].valid, m["frequency"].reason
        return board.parts, m["frequency"].value, m["duty_cycle"]

    def test_tb3_ladder(self):
        p, f, _ = self._measured("tb3")
        # handbook formula (docs/references.md): ideal three-section ladder f = 1/(2πRC√6); the
        # board's output and input resistances load the ladder and lower it by a few per cent
        ideal = 1 / (2 * math.pi * p["R1"].nominal * p["C1"].nominal * math.sqrt(6))
        assert 0.95 * ideal < f < ideal

    def test_wo1_wien_bridge(self):
        p, f, _ = self._measured("wo1")
        # handbook formula (docs/references.md): f = 1/(2π√(R1R2C1C2)); the diode limiter's
        # phase shift moves it by well under 1 % (derived bound, common practice)
        ideal = 1 / (2 * math.pi * math.sqrt(p["R1"].nominal * p["R2"].nominal * p["C1"].nominal * p["C2"].nominal))
        assert f == pytest.approx(ideal, rel=0.005)

    def test_pf2_timer(self):
        p, f, duty = self._measured("pf2")
        r1, r2, c = p["R1"].nominal, p["R2"].nominal, p["C"].nominal
        # timer astable (docs/references.md): f = 1/(ln2·(R1+2R2)·C), duty (R1+R2)/(R1+2R2)
        assert f == pytest.approx(1 / (math.log(2) * (r1 + 2 * r2) * c), rel=1e-3)
        assert duty.valid and duty.value == pytest.approx(100 * (r1 + r2) / (r1 + 2 * r2), abs=0.1)

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
