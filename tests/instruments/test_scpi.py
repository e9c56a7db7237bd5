"""The shared SCPI session, through pyvisa-py over a loopback socket."""

from __future__ import annotations

import numpy as np
import pytest
from scpi_testbench import config_for, make_bench

from benchgate.errors import InstrumentError, StationError
from benchgate.instruments.scpi import ERROR_QUEUE_CAP, ScpiSession
from benchgate.instruments.scpi_dmm import ScpiDmm
from benchgate.instruments.scpi_supply import ScpiSupply
from benchgate.instruments.station import InstrumentConfig


@pytest.fixture
def bench():
    b = make_bench()
    yield b
    b.stop()


class TestIdentity:
    def test_idn_recorded(self, bench):
        with ScpiDmm.open(config_for(bench, "dmm")) as dmm:
            # IEEE 488.2 *IDN? reply: manufacturer, model, serial number, firmware (four fields)
            fields = dmm.identity.split(",")
            assert len(fields) == 4
            assert dmm.identity == bench.instruments["dmm"].identity
        assert "*IDN?" in bench.instruments["dmm"].received

    def test_terminations_and_timeout_set(self, bench):
        with ScpiDmm.open(config_for(bench, "dmm", timeout=0.25)) as dmm:
            res = dmm.session._res
            assert res.read_termination == "\n" and res.write_termination == "\n"
            assert res.timeout == 250  # pyvisa timeout is in ms

    def test_reset_option_sends_rst_and_cls(self, bench):
        bench.instruments["supply"].voltage = 5.0
        with ScpiSupply.open(config_for(bench, "supply", reset=True)):
            pass
        log = list(bench.instruments["supply"].received)
        assert log.index("*RST") < log.index("*CLS")
        assert bench.instruments["supply"].voltage == 0.0

    def test_refused_connection_is_one_clear_error(self, bench):
        port = bench.ports["dmm"]
        bench.stop()
        cfg = InstrumentConfig("dmm", "scpi-dmm", f"TCPIP0::127.0.0.1::{port}::SOCKET", 0.3)
        with pytest.raises(InstrumentError) as info:
            ScpiDmm.open(cfg)
        assert info.value.instrument == "dmm"
        assert "cannot open" in info.value.one_line()


class TestErrorQueue:
    def test_undefined_header(self, bench):
        with ScpiSupply.open(config_for(bench, "supply")) as supply:
            with pytest.raises(InstrumentError) as info:
                supply.session.write("BOGus:NODE 1")
            # SCPI-99: -113 "Undefined header"
            assert info.value.code == -113
            assert info.value.code_text.startswith("Undefined header")
            # drained until 0: the queue is empty now (SCPI-99: 0,"No error")
            assert supply.session.query("SYST:ERR?") == '0,"No error"'

    def test_out_of_range_voltage(self, bench):
        with ScpiSupply.open(config_for(bench, "supply")) as supply:
            with pytest.raises(InstrumentError) as info:
                supply.set_voltage(1000.0)
            # SCPI-99: -222 "Data out of range"
            assert info.value.code == -222
            assert "Data out of range" in info.value.code_text
            assert "-222" in info.value.one_line()
            assert supply.session.read_errors() == []

    def test_several_entries_first_reported_rest_drained(self, bench):
        with ScpiSupply.open(config_for(bench, "supply")) as supply:
            bench.inject_error("supply", -300, "Device-specific error; relay")
            bench.inject_error("supply", -221, "Settings conflict")
            with pytest.raises(InstrumentError) as info:
                supply.set_voltage(3.0)
            assert info.value.code == -300
            assert "1 more" in info.value.message
            assert supply.session.query("SYST:ERR?") == '0,"No error"'

    def test_stale_errors_at_open_are_kept_not_blamed(self, bench):
        bench.inject_error("supply", -100, "Command error")
        with ScpiSupply.open(config_for(bench, "supply")) as supply:
            assert supply.session.stale_errors == [(-100, "Command error")]
            supply.set_voltage(2.0)  # does not raise for the earlier entry

    def test_cap_on_a_queue_that_never_empties(self):
        class Endless:  # a resource whose error queue always has an entry
            timeout = 300

            def write(self, _):
                pass

            def read_raw(self):
                return b'-100,"Command error"\n'

            def close(self):
                pass

        session = ScpiSession("dmm", "fake", Endless(), timeout=0.3,
                              templates={"error_query": "SYST:ERR?", "identify": "*IDN?"})
        with pytest.raises(InstrumentError) as info:
            session.read_errors()
        assert f"after {ERROR_QUEUE_CAP} reads" in info.value.message
        assert info.value.code == -100


class TestTimeouts:
    def test_slow_reply_then_next_query_correct(self, bench):
        with ScpiDmm.open(config_for(bench, "dmm", timeout=0.2)) as dmm:
            bench.faults.slow("dmm", 0.5)
            with pytest.raises(InstrumentError) as info:
                dmm.measure_dc_voltage()
            assert "no reply" in info.value.message
            # the late DC reply (1.25 V) must not be taken as the AC reading (0.7071 V)
            assert dmm.measure_ac_voltage().value == pytest.approx(0.7071)
            assert dmm.session.discarded_replies == 1
            assert dmm.measure_dc_voltage().value == pytest.approx(1.25)

    def test_missing_reply_then_next_query_correct(self, bench):
        with ScpiDmm.open(config_for(bench, "dmm", timeout=0.2)) as dmm:
            bench.faults.drop("dmm")
            with pytest.raises(InstrumentError):
                dmm.measure_dc_current()
            assert dmm.measure_dc_voltage().value == pytest.approx(1.25)

    def test_garbage_before_reply(self, bench):
        with ScpiDmm.open(config_for(bench, "dmm", timeout=0.2)) as dmm:
            bench.faults.garbage("dmm", b"@@noise@@\n")
            with pytest.raises(InstrumentError) as info:
                dmm.measure_dc_voltage()
            assert "not a number" in info.value.message
            assert dmm.measure_ac_voltage().value == pytest.approx(0.7071)

    def test_per_call_timeout_restored(self, bench):
        with ScpiDmm.open(config_for(bench, "dmm", timeout=0.2)) as dmm:
            bench.faults.slow("dmm", 0.3)
            assert dmm.session.query_float("MEAS:VOLT:DC?", timeout=2.0) == pytest.approx(1.25)
            assert dmm.session._res.timeout == 200


class TestBinaryBlocks:
    def test_header_length_mismatch_refused(self, bench):
        from benchgate.instruments.scpi_digitizer import ScpiDigitizer

        with ScpiDigitizer.open(config_for(bench, "digitizer")) as dig:
            dig.setup("ch1", duration=0.01, rate=1e4)  # 100 points
            dig.arm()
            dig.wait()
            with pytest.raises(InstrumentError) as info:
                dig.session.query_binary_values("FETC:WAV?", points=99)
            assert "expected 99" in info.value.message
            # the unread block is drained before the next exchange
            assert dig.fetch().size == 100

    def test_non_block_reply_refused(self, bench):
        with ScpiDmm.open(config_for(bench, "dmm")) as dmm:
            with pytest.raises(InstrumentError) as info:
                dmm.session.query_binary_values("MEAS:VOLT:DC?")
            assert "definite-length block" in info.value.message
            assert dmm.measure_ac_voltage().value == pytest.approx(0.7071)

    def test_big_endian_read_when_instrument_sends_normal_order(self, bench):
        from benchgate.instruments.scpi_digitizer import ScpiDigitizer

        cfg = config_for(bench, "digitizer", commands={"byte_order": "FORM:BORD NORM"})
        with ScpiDigitizer.open(cfg) as dig:
            dig.setup("ch1", duration=0.001, rate=1e5)
            dig.arm()
            dig.wait()
            values = dig.session.query_binary_values("FETC:WAV?", is_big_endian=True, points=100)
        expected = np.sin(2 * np.pi * 1000.0 * np.arange(100) / 1e5).astype(np.float32)
        np.testing.assert_array_equal(values, expected)  # numpy as reference


class TestCommandTemplates:
    def test_station_override_is_used(self, bench):
        cfg = config_for(bench, "supply", commands={"set_voltage": "SOURce:VOLTage:LEVel {value}"})
        with ScpiSupply.open(cfg) as supply:
            supply.set_voltage(4.5)
        assert "SOURce:VOLTage:LEVel 4.5" in bench.instruments["supply"].received
        assert bench.instruments["supply"].voltage == pytest.approx(4.5)

    def test_unknown_template_is_a_station_error(self, bench):
        cfg = config_for(bench, "supply", commands={"set_voltge": "VOLT {value}"})
        with pytest.raises(StationError) as info:
            ScpiSupply.open(cfg)
        assert info.value.line == 7 and info.value.file == "station.yaml"
        assert "set_voltge" in info.value.message and "set_voltage" in info.value.message

    def test_unknown_placeholder_is_a_station_error(self, bench):
        cfg = config_for(bench, "supply", commands={"set_voltage": "VOLT {volts}"})
        with pytest.raises(StationError) as info:
            ScpiSupply.open(cfg)
        assert "{volts}" in info.value.message

    def test_override_of_common_command(self, bench):
        cfg = config_for(bench, "dmm", commands={"error_query": "SYSTem:ERRor:NEXT?"})
        with ScpiDmm.open(cfg) as dmm:
            dmm.session.check_errors("nothing")
        assert "SYSTem:ERRor:NEXT?" in bench.instruments["dmm"].received


def test_unusable_visa_library_is_one_clear_error(bench):
    with pytest.raises(InstrumentError) as info:
        ScpiDmm.open(config_for(bench, "dmm", visa_library="@nonexistent"))
    assert info.value.instrument == "dmm" and "@nonexistent" in info.value.message


def test_registry_names_these_drivers():
    from benchgate.instruments.registry import Registry
    from benchgate.instruments.scpi_counter import ScpiCounter
    from benchgate.instruments.scpi_digitizer import ScpiDigitizer

    reg = Registry()
    assert reg.driver("scpi-supply") is ScpiSupply and reg.driver("scpi-dmm") is ScpiDmm
    assert reg.driver("scpi-counter") is ScpiCounter and reg.driver("scpi-digitizer") is ScpiDigitizer
