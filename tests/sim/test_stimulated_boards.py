"""The AA-1 amplifier and LP-2 filter boards, driven by the emulated generator: their models
against the circuits' transfer functions (scipy.signal.freqs), measured gain, phase and −3 dB
frequency within U, and each defect failing the check it should."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import signal

from benchgate.analysis import Capture
from benchgate.analysis.response import Stimulated, gain, gain_db, output_thd, phase
from benchgate.analysis.sweep import FrequencySweep, ResponsePoint, f_3db_high, f_3db_low
from benchgate.clock import ManualClock
from benchgate.plan import stages
from benchgate.sim.backend import BenchState, BoardBackend
from benchgate.sim.boards import draw_unit
from benchgate.sim.circuits.stimulated import transfer

RATE = 200_000.0


def _freqs_reference(unit, f):
    """The board's response by scipy.signal.freqs of the circuit's polynomials (handbook
    formulas, from memory: coupling high-pass s·Rb·Cin/(s·Rb·Cin + 1); non-inverting gain
    1 + Rf/Rg; first-order tone low-pass; unity-gain Sallen–Key 1/(s²R1R2C1C2 + s·C2(R1+R2) + 1))."""
    v = unit.values
    hp_b, hp_a = [v["Rb"] * v["Cin"], 0.0], [v["Rb"] * v["Cin"], 1.0]
    if unit.board.model == "aa1":
        b = np.polymul(hp_b, [1.0 + v["Rf"] / v["Rg"]])
        a = np.polymul(hp_a, [v["Rt"] * v["Ct"], 1.0])
    else:
        b = hp_b
        a = np.polymul(hp_a, [v["R1"] * v["R2"] * v["C1"] * v["C2"], v["C2"] * (v["R1"] + v["R2"]), 1.0])
    _, h = signal.freqs(b, a, worN=2 * np.pi * np.atleast_1d(f))
    return h


class Bench:
    """The simulated unit with the emulated generator's settings, no sockets (manual clock)."""

    def __init__(self, board, serial="OH-1001", defect=None):
        self.clock = ManualClock(10.0)
        self.unit = draw_unit(board, serial, defect)
        self.state = BenchState(self.unit, self.clock, seed=3)
        self.backend = BoardBackend(self.state)
        self.state.set_supply(self.unit.board.supply, 0.1, True)

    def tone(self, f, vpp, *, settle=0.3, duration=0.02) -> Stimulated:
        self.backend.generator_changed({"waveform": "sine", "frequency": f, "vpp": vpp, "offset": 0.0,
                                        "load": None, "output": True})
        self.clock.advance(settle)
        block = self.backend.digitizer_channels_at(self.clock.monotonic(), RATE, int(duration * RATE), ("IN", "OUT"))
        return Stimulated(Capture(block[:, 0], RATE, channel="in"), Capture(block[:, 1], RATE, channel="out"), f)


@pytest.mark.parametrize("board", ["aa1", "lp2"])
def test_model_is_the_circuit(board):
    # the state-space model's H(jω) against scipy.signal.freqs of the circuit's polynomials
    unit = draw_unit(board, "OH-2002")
    f = np.logspace(0, 5, 31)
    np.testing.assert_allclose(transfer(unit.circuit(), f), _freqs_reference(unit, f), rtol=1e-9)


@pytest.mark.parametrize("board,f", [("lp2", 300.0), ("lp2", 1000.0), ("lp2", 3000.0), ("aa1", 1000.0),
                                     ("aa1", 40.0)])
def test_gain_and_phase_within_u(board, f):
    b = Bench(board)
    rec = b.tone(f, 0.2, duration=max(0.02, 8.0 / f))
    h = _freqs_reference(b.unit, f)[0]  # scipy.signal reference
    g, p = gain(rec), phase(rec)
    assert abs(g.value - abs(h)) <= g.uncertainty
    assert abs(p.value - math.degrees(np.angle(h))) <= p.uncertainty


def _sweep(b, freqs, vpp=0.2):
    pts = []
    for f in freqs:
        rec = b.tone(float(f), vpp, settle=0.2, duration=max(0.01, 5.0 / f))
        pts.append(ResponsePoint(float(f), gain_db(rec), phase(rec)))
    return FrequencySweep(tuple(pts))


def test_lp2_cutoff_against_its_transfer_function():
    b = Bench("lp2")
    freqs = np.logspace(np.log10(200), np.log10(3000), 16)
    m = f_3db_high(_sweep(b, freqs))
    # the exact crossing of the circuit's |H| (scipy.signal.freqs) 3.01 dB below the largest gain swept
    dense = np.logspace(np.log10(200), np.log10(3000), 20001)
    level = 20 * np.log10(np.abs(_freqs_reference(b.unit, dense)))
    ref = max(20 * np.log10(np.abs(_freqs_reference(b.unit, freqs))))
    exact = dense[np.argmax(level < ref + 20 * math.log10(math.sqrt(0.5)))]
    assert abs(m.value - exact) <= m.uncertainty
    # and the Sallen–Key corner from plan/stages.py (the coupling's 1.6 Hz pole is far below)
    v = b.unit.values
    nominal = stages.sallen_key(*(np.array([v[k]]) for k in ("R1", "R2", "C1", "C2")))["f_3db_high"][0]
    assert m.value == pytest.approx(nominal, rel=0.01)


def test_lp2_wrong_capacitor_moves_the_corner_out_of_its_window():
    good, bad = Bench("lp2"), Bench("lp2", defect="wrong_capacitor")
    freqs = np.logspace(np.log10(150), np.log10(3000), 14)
    f_good, f_bad = f_3db_high(_sweep(good, freqs)), f_3db_high(_sweep(bad, freqs))
    assert f_bad.value < 0.75 * f_good.value


def test_aa1_defects():
    nominal = gain(Bench("aa1").tone(1000.0, 0.2)).value
    assert nominal == pytest.approx(11.0, rel=0.05)
    # 1k0 fitted for 2k2: gain 1 + 22k/1k0 = 23 (handbook formula, from memory)
    assert gain(Bench("aa1", defect="wrong_gain_resistor").tone(1000.0, 0.2)).value == pytest.approx(23, rel=0.05)
    dead = gain_db(Bench("aa1", defect="open_coupling").tone(1000.0, 0.2))
    assert dead.valid and dead.value < -20  # far below the nominal 20.8 dB
    tone = Bench("aa1", defect="wrong_capacitor")
    freqs = np.logspace(np.log10(100), np.log10(30e3), 12)
    assert f_3db_high(_sweep(tone, freqs)).value < 2000  # 100n for 10n: about 1 kHz, not 10 kHz
    assert f_3db_low(_sweep(Bench("aa1"), np.logspace(0.5, 3, 12))).value == pytest.approx(
        1 / (2 * math.pi * 33e3 * 220e-9), rel=0.2)  # handbook formula, from memory; parts within tolerance


def test_aa1_rail_clipping_fault_distorts_at_a_normal_level():
    # 0.5 Vpp in → about 5.5 Vpp out: clean within a 4.5 V swing, clipped by a 1.5 V one
    clean = output_thd(Bench("aa1").tone(1000.0, 0.5, duration=0.01))
    clipped = output_thd(Bench("aa1", defect="rail_clipping").tone(1000.0, 0.5, duration=0.01))
    assert clean.value < 0.1 and clipped.value > 5.0


def test_understudy_bench_drives_the_lp2_through_scpi_and_the_adc():
    from benchgate.instruments import load_station, open_station
    from benchgate.sim.bench import UnderstudyBench

    with UnderstudyBench("lp2", speed=20, serial="OH-3003") as ub:
        st = load_station(ub.station_path)
        assert "generator" in st.instruments and st.instruments["adc"].options["channels"] == ("out", "rail", "in")
        with open_station(st, clock=ub.clock) as bench:
            bench["supply"].set_voltage(9.0)
            bench["supply"].output(True)
            gen = bench["generator"]
            gen.set_frequency(1000.0)
            gen.set_amplitude(0.3, "Vpp")
            gen.output(True)
            ub.clock.sleep(0.3)
            ref, out = bench["digitizer"].capture_channels(("in", "out"), duration=0.02)
            a_in, a_out = bench["adc"].capture_channels(("in", "out"), duration=0.05, rate=20_000)
        gen_state = ub.server.instruments["generator"]
        assert gen_state.output is False  # the bench's close switched the generator off
        h = _freqs_reference(ub.unit, 1000.0)[0]  # scipy.signal reference
    for rec in (Stimulated(ref, out, 1000.0), Stimulated(a_in, a_out, 1000.0)):
        g = gain(rec)
        assert abs(g.value - abs(h)) <= g.uncertainty
