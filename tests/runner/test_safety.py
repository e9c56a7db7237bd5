"""Stop signals and the safe-state sequence."""

from __future__ import annotations

import signal

import pytest
from runner_fakes import make_bench

from benchgate.errors import InstrumentDisconnected
from benchgate.runner.safety import SUPPLY_ALARM, StopRequested, StopSignals, make_safe


def stop_self(signum=signal.SIGINT):
    # raise(3) in this process: Python runs the handler before the next bytecode, no wait needed
    signal.raise_signal(signum)


@pytest.mark.parametrize("signum, code", [(signal.SIGINT, 130), (signal.SIGTERM, 143), (signal.SIGHUP, 129)])
def test_first_stop_signal_raises_later_ones_are_counted(signum, code):
    with StopSignals() as signals:
        with pytest.raises(StopRequested) as info:
            stop_self(signum)
        stop_self(signal.SIGINT)  # a second signal during cleanup: no exception
        stop_self(signum)
    # shell convention, 128 + signal number (POSIX: SIGHUP 1, SIGINT 2, SIGTERM 15)
    assert info.value.exit_code == code and info.value.signum == signum
    assert isinstance(info.value, KeyboardInterrupt)  # travels like Ctrl-C, never caught as Exception
    assert signals.count == 3 and signals.deferred == 2


def test_shielded_block_counts_without_raising():
    with StopSignals() as signals:
        signals.shielded = True
        stop_self(signal.SIGTERM)
    assert signals.stop is None and signals.deferred == 1


def test_previous_handlers_are_restored_and_nesting_installs_once():
    before = {s: signal.getsignal(s) for s in (signal.SIGINT, signal.SIGTERM, signal.SIGHUP)}
    with StopSignals() as signals:
        installed = signal.getsignal(signal.SIGTERM)
        assert installed is not before[signal.SIGTERM]
        with signals:  # the runner enters the CLI's handler again: nothing changes
            assert signal.getsignal(signal.SIGTERM) == installed
        assert signal.getsignal(signal.SIGTERM) == installed
    assert {s: signal.getsignal(s) for s in before} == before


def test_ignore_after_stop_leaves_the_signals_ignored():
    before = signal.getsignal(signal.SIGTERM)
    try:
        with StopSignals(ignore_after_stop=True) as signals, pytest.raises(StopRequested):
            stop_self(signal.SIGTERM)
        assert signals.stop is not None
        assert signal.getsignal(signal.SIGTERM) == signal.SIG_IGN
    finally:
        signal.signal(signal.SIGTERM, before)
        signal.signal(signal.SIGINT, signal.default_int_handler)
        signal.signal(signal.SIGHUP, signal.SIG_DFL)


def test_make_safe_retries_the_off_command_and_closes():
    bench = make_bench()
    bench.supply.on = True
    bench.supply.fail_off = 2
    notes = make_safe(bench, bench, None)
    assert bench.supply.on is False and bench.exited
    assert [n.split(" (")[0] for n in notes] == ["supply output off failed"] * 2


def test_make_safe_raises_the_alarm_when_the_supply_never_answers():
    bench = make_bench()
    bench.supply.on = True
    bench.supply.fail_off = 10
    alarms: list[str] = []
    notes = make_safe(bench, bench, None, alarm=alarms.append)
    (line,) = alarms
    assert line.startswith("SWITCH THE SUPPLY OFF BY HAND") and line == SUPPLY_ALARM + line[len(SUPPLY_ALARM):]
    assert line in notes


def test_make_safe_does_not_wait_again_on_a_dead_link():
    bench = make_bench()
    bench.supply.on = True
    calls = []

    def dead(on):
        calls.append(bench.exited)
        raise InstrumentDisconnected("supply", "link given up")

    bench.supply.output = dead
    alarms: list[str] = []
    make_safe(bench, bench, None, alarm=alarms.append)
    # one try by make_safe (retrying a dead link only costs time), then the bench's own exit
    assert calls == [False, True]
    assert len(alarms) == 1
