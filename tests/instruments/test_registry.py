"""Instrument registry and the open bench (safe state on exit)."""

from __future__ import annotations

import datetime as dt

import pytest

from benchgate.errors import InstrumentError
from benchgate.instruments import Bench, open_station
from benchgate.instruments.registry import DEFAULT_DRIVERS, Registry
from benchgate.instruments.station import Calibration, InstrumentConfig, Station


class Log(list):
    pass


def fake_driver(kind_log: Log, *, fail_open=False, fail_close=False, fail_output=False):
    class Fake:
        def __init__(self, config):
            self.name = config.role
            self.address = config.address
            self.identity = f"fake {config.role}"
            self.on = None

        @classmethod
        def open(cls, config, *, clock):
            kind_log.append(("open", config.role))
            if fail_open:
                raise InstrumentError(config.role, "cannot reach it")
            return cls(config)

        def output(self, on):
            kind_log.append(("output", self.name, on))
            if fail_output:
                raise InstrumentError(self.name, "output command failed")
            self.on = on

        def close(self):
            kind_log.append(("close", self.name))
            if fail_close:
                raise InstrumentError(self.name, "close failed")

    return Fake


def station(**cal) -> Station:
    mk = lambda role, kind: InstrumentConfig(role, kind, f"addr-{role}", 1.0, {}, cal.get(role))  # noqa: E731
    return Station("bench-x", "x.yaml", {"adc": mk("adc", "serial-adc"), "supply": mk("supply", "scpi-supply"),
                                          "dmm": mk("dmm", "scpi-dmm")})


def registry(log: Log, **fail) -> Registry:
    return Registry({
        "serial-adc": fake_driver(log, **fail.get("adc", {})),
        "scpi-supply": fake_driver(log, **fail.get("supply", {})),
        "scpi-dmm": fake_driver(log, **fail.get("dmm", {})),
    })


def test_open_all_supply_first_and_switched_off():
    log = Log()
    with open_station(station(), registry=registry(log)) as bench:
        assert isinstance(bench, Bench)
        assert bench["adc"].identity == "fake adc" and bench.get("counter") is None
        assert bench.supply is bench["supply"]
    assert log[:2] == [("open", "supply"), ("output", "supply", False)]
    closes = [e for e in log if e[0] == "close"]
    assert len(closes) == 3
    # on exit the supply output goes off before anything is closed
    last_off = max(i for i, e in enumerate(log) if e == ("output", "supply", False))
    assert last_off < log.index(closes[0])


def test_exception_in_block_still_switches_off_and_closes_even_if_a_close_fails():
    log = Log()
    with pytest.raises(RuntimeError, match="operator pulled the plug"):
        with open_station(station(), registry=registry(log, adc={"fail_close": True})):
            log.clear()
            raise RuntimeError("operator pulled the plug")
    assert log[0] == ("output", "supply", False)
    assert {e[1] for e in log if e[0] == "close"} == {"adc", "supply", "dmm"}


def test_close_failure_without_exception_is_raised_after_cleanup():
    log = Log()
    bench = open_station(station(), registry=registry(log, dmm={"fail_close": True}))
    with pytest.raises(InstrumentError, match="close failed"):
        with bench:
            pass
    assert {e[1] for e in log if e[0] == "close"} == {"adc", "supply", "dmm"}


def test_supply_output_failure_does_not_stop_other_closes():
    log = Log()
    bench = open_station(station(), registry=registry(log), roles=["adc", "supply"])

    def broken_output(on):
        raise InstrumentError("supply", "lost")

    bench["supply"].output = broken_output
    with pytest.raises(InstrumentError, match="lost"):
        bench.close()
    assert {e[1] for e in log if e[0] == "close"} == {"adc", "supply"}


def test_open_failure_leaves_what_opened_safe_and_closed():
    log = Log()
    with pytest.raises(InstrumentError, match="cannot reach it"):
        open_station(station(), registry=registry(log, dmm={"fail_open": True}))
    assert ("output", "supply", False) in log
    assert {e[1] for e in log if e[0] == "close"} == {"supply", "adc"}


def test_roles_subset_and_unknown_role():
    log = Log()
    with open_station(station(), registry=registry(log), roles=["adc"]) as bench:
        assert bench.roles == ("adc",)
        with pytest.raises(InstrumentError, match="no open 'supply'"):
            bench["supply"]
    with pytest.raises(InstrumentError, match="has no 'digitizer'"):
        open_station(station(), registry=registry(log), roles=["digitizer"])


def test_facts_carry_identity_and_calibration():
    cal = Calibration(date=dt.date(2025, 1, 1), due=dt.date(2026, 1, 1))
    with open_station(station(supply=cal), registry=registry(Log())) as bench:
        facts = {f.role: f for f in bench.facts()}
    assert facts["supply"].identity == "fake supply" and facts["supply"].kind == "scpi-supply"
    assert facts["supply"].calibration is cal
    assert facts["supply"].calibration.to_dict(dt.date(2026, 6, 1)) == {
        "date": "2025-01-01", "due": "2026-01-01", "status": "expired", "gain": 1.0, "offset": 0.0}
    assert facts["adc"].calibration is None


def test_instruments_layer_builds_no_run_records():
    import ast
    from pathlib import Path

    import benchgate.instruments as pkg

    for path in Path(pkg.__file__).parent.glob("*.py"):
        for node in ast.walk(ast.parse(path.read_text())):
            if isinstance(node, ast.ImportFrom):
                assert node.module not in ("benchgate.record", "benchgate.runner"), path.name


class TestRegistry:
    def test_unknown_kind(self):
        with pytest.raises(InstrumentError, match="unknown instrument kind 'scpi-scope'"):
            Registry().driver("scpi-scope", "scope")

    def test_string_entries_import_at_call_time(self):
        reg = Registry({"x": "benchgate.instruments.serial_adc:SerialAdc", "y": "benchgate.nope:Thing"})
        from benchgate.instruments.serial_adc import SerialAdc

        assert reg.driver("x") is SerialAdc
        with pytest.raises(InstrumentError, match="driver for kind 'y' is not available"):
            reg.driver("y", "adc")

    def test_default_table_names_every_kind(self):
        assert set(DEFAULT_DRIVERS) == {"serial-adc", "scpi-supply", "scpi-dmm", "scpi-counter", "scpi-digitizer",
                                        "scpi-generator"}

    def test_instances_do_not_share_registrations(self):
        a, b = Registry(), Registry()
        a.register("fake", object)
        assert "fake" in a.kinds() and "fake" not in b.kinds()


def test_understudy_bench_supply_is_off_after_an_exception(tmp_path):
    # whole path: station file from the understudy bench, real drivers over the pty and loopback
    from benchgate.instruments import load_station
    from benchgate.sim.bench import UnderstudyBench

    with UnderstudyBench("tb3", speed=5.0, workdir=tmp_path) as vb:
        st = load_station(vb.station_path)
        with pytest.raises(RuntimeError, match="abort"):
            with open_station(st, clock=vb.clock) as bench:
                assert set(bench.roles) == set(st.instruments)
                bench.supply.set_voltage(9.0)
                bench.supply.output(True)
                assert vb.supply_output is True
                assert bench["adc"].identity
                raise RuntimeError("abort")
        assert vb.supply_output is False


def test_typed_accessors_check_the_face():
    from scpi_testbench import config_for, make_bench

    from benchgate.instruments.base import Supply
    from benchgate.instruments.scpi_dmm import ScpiDmm
    from benchgate.instruments.scpi_supply import ScpiSupply

    sim = make_bench()
    try:
        supply, dmm = ScpiSupply.open(config_for(sim, "supply")), ScpiDmm.open(config_for(sim, "dmm"))
        with Bench(station(), {"supply": supply, "adc": dmm}) as bench:
            assert isinstance(bench.require_supply(), Supply)
            with pytest.raises(InstrumentError, match="the adc of station 'bench-x' cannot capture"):
                bench.recorder("adc")  # a DMM put in the ADC's place
        with Bench(station(), {"supply": dmm}) as bench:
            with pytest.raises(InstrumentError, match="is not a supply"):
                bench.require_supply()
            bench._instruments.clear()  # nothing to switch off: the DMM has no output
    finally:
        sim.stop()
