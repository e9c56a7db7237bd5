"""The SCPI DMM and counter drivers: readings with names, units and uncertainty."""

from __future__ import annotations

import math

import pytest
from scpi_testbench import config_for, make_bench

from benchgate.instruments.base import Counter, Dmm
from benchgate.instruments.scpi_counter import ScpiCounter
from benchgate.instruments.scpi_dmm import ScpiDmm


@pytest.fixture
def bench():
    b = make_bench(dc_voltage=4.5, ac_voltage=0.25, dc_current=-2e-3, frequency=955.25)
    yield b
    b.stop()


def test_dmm_readings(bench):
    with ScpiDmm.open(config_for(bench, "dmm", accuracy={"gain": 1e-4, "offset": 1e-3})) as dmm:
        assert isinstance(dmm, Dmm)
        dc, ac, i = dmm.measure_dc_voltage(), dmm.measure_ac_voltage(), dmm.measure_dc_current()
    assert (dc.name, dc.unit, dc.value) == ("dc_voltage", "V", 4.5)
    assert (ac.name, ac.unit, ac.value) == ("ac_voltage", "V", 0.25)
    assert (i.name, i.unit, i.value) == ("dc_current", "A", -2e-3)
    # GUM: rectangular bound a = gain*|x| + offset -> U = 2*a/sqrt(3); |x| for a negative reading
    assert i.uncertainty == pytest.approx(2 * (1e-4 * 2e-3 + 1e-3) / math.sqrt(3))
    assert dc.uncertainty == pytest.approx(2 * (1e-4 * 4.5 + 1e-3) / math.sqrt(3))
    log = list(bench.instruments["dmm"].received)
    assert {"MEAS:VOLT:DC?", "MEAS:VOLT:AC?", "MEAS:CURR:DC?"} <= set(log)


def test_counter_frequency(bench):
    with ScpiCounter.open(config_for(bench, "counter", accuracy={"gain": 1e-6})) as counter:
        assert isinstance(counter, Counter)
        f = counter.measure_frequency()
    assert (f.name, f.unit, f.value) == ("frequency", "Hz", 955.25)
    assert f.uncertainty == pytest.approx(2 * 1e-6 * 955.25 / math.sqrt(3))


def test_counter_override_of_measure_template(bench):
    cfg = config_for(bench, "counter", commands={"measure_frequency": "MEASure:SCALar:FREQuency?"})
    with ScpiCounter.open(cfg) as counter:
        assert counter.measure_frequency().value == 955.25
    assert "MEASure:SCALar:FREQuency?" in bench.instruments["counter"].received
