"""The SCPI signal generator driver: settings, limits, error queue, and always leaving it off;
the two-channel digitizer capture it is measured with."""

from __future__ import annotations

import math

import pytest
from scpi_testbench import config_for, make_bench

from benchgate.analysis.response import Stimulated, gain, phase
from benchgate.errors import InstrumentError, ScpiQueueError
from benchgate.instruments import Bench
from benchgate.instruments.base import Generator, MultiRecorder
from benchgate.instruments.scpi_digitizer import ScpiDigitizer
from benchgate.instruments.scpi_generator import ScpiGenerator, to_vpp
from benchgate.instruments.station import Station


@pytest.fixture
def bench():
    b = make_bench()
    yield b
    b.stop()


def _generator_output(bench) -> bool:
    gen = bench.instruments["generator"]
    with gen.lock:
        return bool(gen.output)


def test_implements_the_generator_face(bench):
    with ScpiGenerator.open(config_for(bench, "generator")) as gen:
        assert isinstance(gen, Generator)


def test_settings_reach_the_instrument(bench):
    with ScpiGenerator.open(config_for(bench, "generator", load="50")) as gen:
        gen.set_waveform("sine")
        gen.set_frequency(1234.5)
        gen.set_amplitude(0.5, "Vrms")
        gen.set_offset(0.25)
        gen.output(True)
        assert gen.output_state() is True
        seen = bench.backend.generator
    assert seen["frequency"] == 1234.5 and seen["waveform"] == "sine" and seen["load"] == 50.0
    # a sine's peak-to-peak is 2·√2 times its rms (definition of the rms of a sine)
    assert seen["vpp"] == pytest.approx(2 * math.sqrt(2) * 0.5)
    assert seen["offset"] == 0.25 and seen["output"] is True


def test_amplitude_units():
    # crest factors from the waveforms' definitions: sine √2, square 1, triangle √3
    assert to_vpp(1.0, "Vrms", "sine") == pytest.approx(2 * math.sqrt(2))
    assert to_vpp(1.0, "Vrms", "square") == pytest.approx(2.0)
    assert to_vpp(1.0, "Vrms", "triangle") == pytest.approx(2 * math.sqrt(3))
    assert to_vpp(1.5, "Vpk") == 3.0 and to_vpp(1.5, "Vpp") == 1.5
    with pytest.raises(ValueError, match="unknown amplitude unit"):
        to_vpp(1.0, "dBm")


def test_station_limits_refuse_without_sending(bench):
    with ScpiGenerator.open(config_for(bench, "generator", max_amplitude=2.0, max_frequency=50e3)) as gen:
        before = len(bench.instruments["generator"].received)
        with pytest.raises(InstrumentError, match="above the station's max_amplitude"):
            gen.set_amplitude(3.0, "Vpp")
        with pytest.raises(InstrumentError, match="max_frequency"):
            gen.set_frequency(60e3)
        assert len(bench.instruments["generator"].received) == before  # nothing was sent


def test_instrument_error_is_reported_with_its_code(bench):
    with ScpiGenerator.open(config_for(bench, "generator")) as gen:
        with pytest.raises(ScpiQueueError) as info:
            gen.set_amplitude(50.0)  # the emulated generator's range is 20 Vpp: -222
        assert info.value.code == -222


def test_bad_load_option_is_refused_at_check():
    problems = ScpiGenerator.check_options({"load": "lots"})
    assert problems and problems[0][0] == ("load",)
    assert ScpiGenerator.check_options({"load": "high"}) == []


def test_output_off_after_exception_inside_session(bench):
    with pytest.raises(RuntimeError):
        with ScpiGenerator.open(config_for(bench, "generator")) as gen:
            gen.output(True)
            assert _generator_output(bench)
            raise RuntimeError("fixture lid opened")
    assert not _generator_output(bench)  # asked the emulated generator itself


def test_output_off_at_close_even_after_a_timeout(bench):
    gen = ScpiGenerator.open(config_for(bench, "generator", timeout=0.2))
    gen.output(True)
    bench.faults.drop("generator")
    with pytest.raises(InstrumentError):
        gen.output_state()
    gen.close()
    assert not _generator_output(bench)


def test_bench_safe_switches_both_outputs_off(bench):
    from benchgate.instruments.scpi_supply import ScpiSupply

    supply = ScpiSupply.open(config_for(bench, "supply"))
    gen = ScpiGenerator.open(config_for(bench, "generator"))
    station = Station(id="t", path="station.yaml", instruments={})
    with Bench(station, {"supply": supply, "generator": gen}) as b:
        supply.output(True)
        gen.output(True)
        b.safe()
        assert not bench.supply_output and not _generator_output(bench)
        gen.output(True)
    assert not _generator_output(bench)  # the bench's exit as well


def test_safe_bench_switches_the_generator_off_and_alarms_when_it_cannot():
    from contextlib import nullcontext

    from benchgate.runner.safety import GENERATOR_ALARM, safe_bench

    class Stuck:
        def output(self, on):
            raise InstrumentError("generator", "no answer")

    class FakeBench:
        def __init__(self):
            self.parts = {"generator": Stuck()}

        def get(self, role, default=None):
            return self.parts.get(role, default)

    alarms: list[str] = []
    notes: list[str] = []
    with safe_bench(lambda: nullcontext(FakeBench()), notes=notes, alarm=alarms.append):
        pass
    assert [n.split(" (")[0] for n in notes[:3]] == ["generator output off failed"] * 3
    assert alarms and alarms[0].startswith(GENERATOR_ALARM)


def test_two_channel_capture_measures_the_response(bench):
    # ConstantBackend: the second channel is the generator's sine × 2, shifted by −45° (by construction)
    dig_cfg = config_for(bench, "digitizer", channels={"in": "CH1", "out": "CH2"}, rate=100e3, channel_match=0.001)
    with ScpiGenerator.open(config_for(bench, "generator")) as gen, ScpiDigitizer.open(dig_cfg) as dig:
        assert isinstance(dig, MultiRecorder)
        gen.set_frequency(1000.0)
        gen.set_amplitude(1.0, "Vpp")
        gen.output(True)
        ref, out = dig.capture_channels(("in", "out"), duration=0.05)
    assert ref.channel == "in" and out.channel == "out" and ref.n == out.n == 5000
    assert out.metadata["channel_skew_s"] == 0.0 and out.metadata["channel_gain_tolerance"] == 0.001
    rec = Stimulated(ref, out, 1000.0)
    g, p = gain(rec), phase(rec)
    assert abs(g.value - 2.0) <= g.uncertainty  # the 0.1 % channel match sets U
    assert p.value == pytest.approx(-45.0, abs=1e-3)


def test_two_channels_need_a_backend_that_has_them(bench, monkeypatch):
    from benchgate.sim.scpi_server import ConstantBackend

    monkeypatch.delattr(ConstantBackend, "digitizer_channels_at")  # a one-channel input
    with ScpiDigitizer.open(config_for(bench, "digitizer", channels=["a", "b"], rate=1e4)) as dig:
        with pytest.raises(ScpiQueueError) as info:
            dig.capture_channels(("a", "b"), duration=0.01)
        assert info.value.code == -221
