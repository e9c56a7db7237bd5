"""Stop signals and the safe-state sequence."""

from __future__ import annotations

import signal

import pytest
from runner_fakes import make_bench

from benchgate.errors import InstrumentDisconnected
from benchgate.runner.safety import SUPPLY_ALARM, StopRequested, StopSignals, safe_bench


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


def opened(bench):
    return lambda: bench  # the fake bench is its own context manager


def test_safe_bench_retries_the_off_command_and_closes():
    bench = make_bench()
    notes: list[str] = []
    with safe_bench(opened(bench), notes=notes) as b:
        b.supply.on = True
        b.supply.fail_off = 2
    assert bench.supply.on is False and bench.exited
    assert [n.split(" (")[0] for n in notes] == ["supply output off failed"] * 2


def test_safe_bench_raises_the_alarm_when_the_supply_never_answers():
    bench = make_bench()
    alarms: list[str] = []
    notes: list[str] = []
    with pytest.raises(RuntimeError, match="the step's own error"):
        with safe_bench(opened(bench), notes=notes, alarm=alarms.append) as b:
            b.supply.on = True
            b.supply.fail_off = 10
            raise RuntimeError("the step's own error")  # travels on unchanged
    (line,) = alarms
    assert line.startswith(SUPPLY_ALARM + ": ") and line in notes


def test_safe_bench_does_not_wait_again_on_a_dead_link():
    bench = make_bench()
    calls = []

    def dead(on):
        calls.append(bench.exited)
        raise InstrumentDisconnected("supply", "link given up")

    alarms: list[str] = []
    with safe_bench(opened(bench), notes=[], alarm=alarms.append):
        bench.supply.output = dead
    # one try here (retrying a dead link only costs time), then the bench's own exit
    assert calls == [False, True]
    assert len(alarms) == 1


def test_safe_bench_shields_the_way_out_from_stop_signals():
    bench = make_bench()
    seen = []
    with StopSignals() as signals:
        original = bench.supply.output

        def off_with_a_signal(on):
            seen.append(signals.shielded)
            stop_self(signal.SIGTERM)  # arrives while the supply is being switched off: only counted
            original(on)

        with pytest.raises(StopRequested):
            with safe_bench(opened(bench), notes=[], signals=signals):
                bench.supply.on = True
                bench.supply.output = off_with_a_signal
                stop_self(signal.SIGINT)
    assert seen and all(seen) and bench.supply.on is False and bench.exited
    assert signals.deferred == len(seen)


def test_close_errors_are_notes_not_the_outcome():
    bench = make_bench()

    class Failing(type(bench)):
        def __exit__(self, *exc):
            super().__exit__(*exc)
            raise OSError("port already gone")

    failing = Failing(bench.instruments)
    notes: list[str] = []
    with safe_bench(lambda: failing, notes=notes):
        pass
    assert notes == ["closing the instruments: port already gone"]
