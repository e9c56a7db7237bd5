"""The instrument faces the runner uses: typed readings and the triggered-recorder face."""

from __future__ import annotations

import pytest
from scpi_testbench import config_for, make_bench

from benchgate.errors import InstrumentError
from benchgate.instruments.base import READINGS, Adc, Digitizer, Dmm, Recorder, Supply, take_reading
from benchgate.instruments.scpi_counter import ScpiCounter
from benchgate.instruments.scpi_digitizer import ScpiDigitizer
from benchgate.instruments.scpi_dmm import ScpiDmm
from benchgate.instruments.scpi_supply import ScpiSupply
from benchgate.instruments.serial_adc import SerialAdc


@pytest.fixture
def bench():
    b = make_bench(dc_voltage=1.25, ac_voltage=0.7071, dc_current=4e-3, frequency=997.0, load_current=4e-3)
    yield b
    b.stop()


def test_every_plan_reading_has_a_typed_call():
    from benchgate.common.names import READING_SOURCES

    assert set(READINGS) == set(READING_SOURCES)


def test_take_reading_through_each_face(bench):
    with ScpiDmm.open(config_for(bench, "dmm")) as dmm, ScpiCounter.open(config_for(bench, "counter")) as counter, \
            ScpiSupply.open(config_for(bench, "supply")) as supply:
        supply.set_voltage(9.0)
        supply.output(True)
        got = {q: take_reading({"dmm": dmm, "counter": counter, "supply": supply}[role[0]], q)
               for q, role in (("dc_voltage", ("dmm",)), ("ac_voltage", ("dmm",)), ("dc_current", ("dmm",)),
                               ("frequency", ("counter",)), ("supply_voltage", ("supply",)),
                               ("supply_current", ("supply",)))}
        supply.output(False)
    assert {q: m.name for q, m in got.items()} == {q: q for q in got}  # each reading named as asked
    assert got["dc_voltage"].value == pytest.approx(1.25) and got["frequency"].value == pytest.approx(997.0)
    assert got["supply_voltage"].value == pytest.approx(9.0)


def test_a_reading_the_instrument_cannot_take_is_one_clear_error(bench):
    with ScpiCounter.open(config_for(bench, "counter")) as counter:
        with pytest.raises(InstrumentError, match="a dmm reading \\(dc_voltage\\) cannot be taken") as info:
            take_reading(counter, "dc_voltage")
        assert info.value.instrument == "counter"
        with pytest.raises(InstrumentError, match="no reading called 'power'"):
            take_reading(counter, "power")


def test_digitizer_is_a_triggered_recorder_and_the_adc_is_not(bench):
    with ScpiDigitizer.open(config_for(bench, "digitizer")) as dig:
        assert isinstance(dig, Digitizer) and isinstance(dig, Recorder)
    with ScpiDmm.open(config_for(bench, "dmm")) as dmm:
        assert not isinstance(dmm, Recorder)
    with ScpiSupply.open(config_for(bench, "supply")) as supply:
        assert isinstance(supply, Supply) and not isinstance(supply, Dmm)


def test_serial_adc_streams_and_is_never_taken_for_a_digitizer():
    import sys

    if sys.platform == "win32":
        pytest.skip("needs POSIX pseudo-terminals")
    from benchgate.clock import ScaledClock
    from benchgate.instruments.serial_options import ADC_DEFAULTS as _ADC_DEFAULTS
    from benchgate.instruments.station import InstrumentConfig
    from benchgate.sim.serial_device import PtyAdcDevice, SineSource

    clock = ScaledClock(10.0)
    with PtyAdcDevice(SineSource(channels=("out",)), clock=clock) as dev:
        opts = dict(_ADC_DEFAULTS, channels=("out",), rts_low=False)
        with SerialAdc.open(InstrumentConfig("adc", "serial-adc", dev.port, 1.0, opts), clock=clock) as adc:
            assert isinstance(adc, Adc) and isinstance(adc, Recorder)
            assert not isinstance(adc, Digitizer)
