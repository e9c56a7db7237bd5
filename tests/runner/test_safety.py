"""Ctrl-C handling and the safe-state sequence."""

from __future__ import annotations

import os
import signal
import time

import pytest
from runner_fakes import make_bench

from benchgate.runner.safety import InterruptGuard, make_safe


def interrupt_self():
    os.kill(os.getpid(), signal.SIGINT)
    time.sleep(0.05)  # the handler runs in the main thread at the next bytecode boundary


def test_first_interrupt_raises_later_ones_are_counted():
    with InterruptGuard() as guard:
        with pytest.raises(KeyboardInterrupt):
            interrupt_self()
        interrupt_self()  # a second Ctrl-C during cleanup: no exception
        interrupt_self()
    assert guard.raised and guard.count == 3 and guard.deferred == 2


def test_shielded_block_counts_without_raising():
    with InterruptGuard() as guard:
        guard.shielded = True
        interrupt_self()
    assert not guard.raised and guard.deferred == 1


def test_previous_handler_is_restored():
    before = signal.getsignal(signal.SIGINT)
    with InterruptGuard():
        assert signal.getsignal(signal.SIGINT) is not before
    assert signal.getsignal(signal.SIGINT) is before


def test_make_safe_retries_the_off_command_and_closes():
    bench = make_bench()
    bench.supply.on = True
    bench.supply.fail_off = 2
    notes = make_safe(bench, bench, None)
    assert bench.supply.on is False and bench.exited
    assert [n.split(" (")[0] for n in notes] == ["supply output off failed"] * 2


def test_make_safe_says_so_when_the_supply_never_answers():
    bench = make_bench()
    bench.supply.on = True
    bench.supply.fail_off = 10
    notes = make_safe(bench, bench, None)
    assert any(n.startswith("WARNING: the supply output could not be confirmed off") for n in notes)
