"""The SCPI supply driver: settings, read-back with uncertainty, and always leaving it off."""

from __future__ import annotations

import math

import pytest
from scpi_testbench import config_for, make_bench

from benchgate.errors import InstrumentError, StationError
from benchgate.instruments.base import Supply
from benchgate.instruments.scpi_supply import ScpiSupply


@pytest.fixture
def bench():
    b = make_bench(load_current=4e-3)
    yield b
    b.stop()


def test_implements_the_supply_face(bench):
    with ScpiSupply.open(config_for(bench, "supply")) as supply:
        assert isinstance(supply, Supply)
        assert supply.name == "supply" and supply.address == bench.resources["supply"]


def test_settings_reach_the_instrument(bench):
    with ScpiSupply.open(config_for(bench, "supply")) as supply:
        supply.set_voltage(9.0)
        supply.set_current_limit(0.05)
        supply.output(True)
        assert bench.supply_output is True
        assert supply.output_state() is True
        assert bench.backend.changes[-1] == (9.0, 0.05, True)
        v, i = supply.measure_voltage(), supply.measure_current()
    assert (v.name, v.unit, v.value) == ("supply_voltage", "V", 9.0)
    assert (i.name, i.unit) == ("supply_current", "A")
    assert i.value == pytest.approx(4e-3)
    assert v.uncertainty is None  # no accuracy in the station: no uncertainty claimed


def test_uncertainty_from_accuracy_bound(bench):
    accuracy = {"supply_voltage": {"gain": 0.0005, "offset": 0.002},
                "supply_current": {"gain": 0.001, "offset": 1e-4}}
    with ScpiSupply.open(config_for(bench, "supply", accuracy=accuracy)) as supply:
        supply.set_voltage(9.0)
        supply.output(True)
        v, i = supply.measure_voltage(), supply.measure_current()
    # GUM (JCGM 100:2008): rectangular half-width a -> u = a/sqrt(3); U = k*u with k = 2
    a_v = 0.0005 * 9.0 + 0.002
    assert v.uncertainty == pytest.approx(2 * a_v / math.sqrt(3))
    a_i = 0.001 * 4e-3 + 1e-4
    assert i.uncertainty == pytest.approx(2 * a_i / math.sqrt(3))


def test_bad_accuracy_is_a_station_error(bench):
    with pytest.raises(StationError) as info:
        ScpiSupply.open(config_for(bench, "supply", accuracy={"gain": "a lot"}))
    assert "accuracy" in info.value.message and info.value.line == 7


def test_output_off_after_exception_inside_session(bench):
    with pytest.raises(RuntimeError):
        with ScpiSupply.open(config_for(bench, "supply")) as supply:
            supply.set_voltage(9.0)
            supply.output(True)
            assert bench.supply_output is True
            raise RuntimeError("operator pulled the fixture")
    assert bench.supply_output is False  # asked the emulated supply itself


def test_output_off_after_an_instrument_error_inside_session(bench):
    with pytest.raises(InstrumentError):
        with ScpiSupply.open(config_for(bench, "supply")) as supply:
            supply.output(True)
            supply.set_voltage(99.0)  # -222 from the supply
    assert bench.supply_output is False


def test_output_off_at_close_even_after_a_timeout(bench):
    supply = ScpiSupply.open(config_for(bench, "supply", timeout=0.2))
    supply.output(True)
    bench.faults.drop("supply")
    with pytest.raises(InstrumentError):
        supply.measure_current()
    supply.close()  # the session is stale; OFF still goes out and is confirmed
    assert bench.supply_output is False


def test_close_reports_output_it_could_not_confirm_off(bench):
    supply = ScpiSupply.open(config_for(bench, "supply", timeout=0.2,
                                        commands={"output": "OUTP:PROT {state}"}))
    bench.instruments["supply"].output = True
    with pytest.raises(InstrumentError) as info:
        supply.close()
    assert "still ON" in info.value.message
    assert supply.session._closed  # closed anyway


def test_overload_reading_is_invalid(bench):
    bench.backend.output = True
    with ScpiSupply.open(config_for(bench, "supply")) as supply:
        bench.backend.voltage = 9.9e37  # SCPI-99 overload value (from memory)
        m = supply.measure_voltage()
    assert m.valid is False and "overload" in m.reason


def test_close_after_the_supply_went_away_says_so(bench):
    supply = ScpiSupply.open(config_for(bench, "supply"))
    bench.stop()
    with pytest.raises(InstrumentError) as info:
        supply.close()
    assert "could not switch the output off" in info.value.message
    assert supply.session._closed
