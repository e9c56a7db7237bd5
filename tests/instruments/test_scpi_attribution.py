"""Each SCPI error-queue entry is blamed on the command that caused it, never on the next one."""

from __future__ import annotations

import pytest
from scpi_testbench import config_for, make_bench

from benchgate.errors import InstrumentError, ScpiQueueError
from benchgate.instruments.scpi_digitizer import ScpiDigitizer
from benchgate.instruments.scpi_supply import ScpiSupply

# SCPI-99 error numbers (from memory): -221 "Settings conflict", -222 "Data out of range"
CONFLICT = (-221, "Settings conflict")


@pytest.fixture
def bench():
    b = make_bench(load_current=4e-3)
    yield b
    b.stop()


def test_error_from_a_reading_is_not_blamed_on_output_off(bench):
    # the case: a reading queues an error; the final OUTP OFF used to be blamed for it
    with ScpiSupply.open(config_for(bench, "supply")) as supply:
        supply.set_voltage(9.0)
        supply.output(True)
        bench.faults.error_on("supply", "MEAS:CURR?", *CONFLICT)
        current = supply.measure_current()
        supply.output(False)  # must not raise: OUTP 0 itself was fine
    assert current.valid is False  # the instrument flagged this reading: not trusted
    assert "'MEAS:CURR?' rejected: -221" in current.reason
    assert current.details["instrument_error"] == -221
    assert current.value == pytest.approx(4e-3)  # the value is kept for the record
    assert bench.supply_output is False


# every command the supply driver sends, with the call that sends it
SUPPLY_CALLS = [
    ("SOUR:VOLT", lambda s: s.set_voltage(5.0)),
    ("SOUR:CURR", lambda s: s.set_current_limit(0.05)),
    ("OUTP", lambda s: s.output(True)),
    ("OUTP?", lambda s: s.output_state()),
    ("MEAS:VOLT?", lambda s: s.measure_voltage()),
    ("MEAS:CURR?", lambda s: s.measure_current()),
]


@pytest.mark.parametrize("target", [header for header, _call in SUPPLY_CALLS])
def test_systematic_trial_each_supply_command(bench, target):
    """An error queued by any one command is reported at that command and at no other."""
    blamed: list[tuple[str, str]] = []
    with ScpiSupply.open(config_for(bench, "supply")) as supply:
        bench.faults.error_on("supply", target, *CONFLICT)
        for header, call in SUPPLY_CALLS:
            try:
                result = call(supply)
            except ScpiQueueError as exc:
                blamed.append((header, exc.command))
                continue
            if getattr(result, "valid", True) is False:
                blamed.append((header, result.details["command"]))
        supply.output(False)  # the closing OFF is never blamed
    assert len(blamed) == 1 and blamed[0][0] == target
    assert blamed[0][1].upper().startswith(target)


def test_entry_left_by_an_unchecked_query_is_blamed_on_it_before_the_next_setting(bench):
    with ScpiSupply.open(config_for(bench, "supply")) as supply:
        bench.faults.error_on("supply", "VOLT?", -100, "Command error")
        assert float(supply.session.query("VOLT?")) == 0.0  # raw query: its queue not read
        with pytest.raises(ScpiQueueError) as info:
            supply.set_voltage(3.0)
    err = info.value
    assert err.command == "VOLT?" and err.found_before == "SOUR:VOLT 3"
    assert (err.code, err.code_text) == (-100, "Command error")
    assert "'VOLT?' rejected: -100" in err.message and "before sending 'SOUR:VOLT 3'" in err.message
    assert bench.instruments["supply"].voltage == 0.0  # the setting was not sent after the error


def test_output_off_goes_out_first_and_names_every_suspect(bench):
    with ScpiSupply.open(config_for(bench, "supply")) as supply:
        supply.output(True)
        bench.faults.error_on("supply", "VOLT?", -100, "Command error")
        supply.session.query("VOLT?")  # unchecked
        with pytest.raises(ScpiQueueError) as info:
            supply.output(False)
        assert bench.supply_output is False  # switched off before the queue was read
    assert info.value.suspects == ["VOLT?", "OUTP OFF"]
    assert "one of 'VOLT?', 'OUTP OFF'" in info.value.message
    assert info.value.message.endswith("; the output is confirmed off")


def test_rejected_output_off_says_the_output_is_still_on(bench):
    cfg = config_for(bench, "supply", commands={"output": "OUTP:PROT {state}"})  # a wrong template
    supply = ScpiSupply.open(cfg)
    try:
        bench.instruments["supply"].output = True
        with pytest.raises(ScpiQueueError) as info:
            supply.output(False)
        assert info.value.code == -113 and info.value.message.endswith("; the output is still ON")
    finally:
        bench.instruments["supply"].output = False
        supply.session.close()


def test_setting_error_names_its_own_command_and_both_entries(bench):
    with ScpiSupply.open(config_for(bench, "supply")) as supply:
        bench.faults.error_on("supply", "SOUR:CURR", -300, "Device-specific error; relay")
        with pytest.raises(ScpiQueueError) as info:
            supply.set_current_limit(9.0)  # also out of range: -222 first, then the relay
    err = info.value
    assert err.command == "SOUR:CURR 9" and err.suspects == ["SOUR:CURR 9"]
    assert [c for c, _t in err.entries] == [-222, -300]
    assert isinstance(err, InstrumentError) and "1 more" in err.message


def test_digitizer_fetch_error_is_the_fetch(bench):
    with ScpiDigitizer.open(config_for(bench, "digitizer")) as dig:
        dig.setup("ch1", duration=0.01, rate=1e4)
        dig.arm()
        dig.wait()
        bench.faults.error_on("digitizer", "FETC:WAV?", -230, "Data corrupt or stale")
        with pytest.raises(ScpiQueueError) as info:
            dig.fetch()
    assert info.value.command == "FETC:WAV?" and info.value.code == -230



# every command the digitizer driver sends for one capture
DIGITIZER_COMMANDS = ["ACQ:CHAN", "FORM:DATA", "FORM:BORD", "ACQ:SRAT", "ACQ:POIN", "VOLT:RANG", "ACQ:SRAT?",
                      "INIT", "*OPC?", "FETC:WAV?"]


@pytest.mark.parametrize("target", DIGITIZER_COMMANDS)
def test_systematic_trial_each_digitizer_command(bench, target):
    with ScpiDigitizer.open(config_for(bench, "digitizer")) as dig:
        bench.faults.error_on("digitizer", target, *CONFLICT)
        with pytest.raises(ScpiQueueError) as info:
            dig.capture("ch1", duration=0.01, rate=1e4, range=5.0)
        assert info.value.command.upper().startswith(target) and info.value.suspects == [info.value.command]
        dig.capture("ch1", duration=0.01, rate=1e4, range=5.0)  # the next capture is clean


@pytest.mark.parametrize("role, header, call", [
    ("dmm", "MEAS:VOLT:DC?", lambda d: d.measure_dc_voltage()),
    ("dmm", "MEAS:VOLT:AC?", lambda d: d.measure_ac_voltage()),
    ("dmm", "MEAS:CURR:DC?", lambda d: d.measure_dc_current()),
    ("counter", "MEAS:FREQ?", lambda c: c.measure_frequency()),
])
def test_systematic_trial_each_reading(bench, role, header, call):
    from benchgate.instruments.scpi_counter import ScpiCounter
    from benchgate.instruments.scpi_dmm import ScpiDmm

    driver = {"dmm": ScpiDmm, "counter": ScpiCounter}[role]
    with driver.open(config_for(bench, role)) as inst:
        bench.faults.error_on(role, header, *CONFLICT)
        flagged = call(inst)
        clean = call(inst)
    assert flagged.valid is False and f"'{header}' rejected: -221" in flagged.reason
    assert clean.valid is True  # the entry went with the reading that caused it
