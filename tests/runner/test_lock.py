"""One run per station: the station lock (flock) and its release on process death."""

from __future__ import annotations

import subprocess
import sys

import pytest
from runner_fakes import InstrumentConfig, Station

from benchgate.errors import StationBusy
from benchgate.runner.lock import StationLock


def test_second_lock_is_refused_until_the_first_is_released(tmp_path):
    first = StationLock(Station(), tmp_path).acquire()
    with pytest.raises(StationBusy, match=r"^station busy: the adc of station 'fake-bench' \(fake://\) .*pid \d+"):
        StationLock(Station(), tmp_path).acquire()
    first.release()
    with StationLock(Station(), tmp_path) as again:
        assert again.held


def test_the_lock_is_on_the_instruments_not_the_station_name(tmp_path):
    with StationLock(Station(), tmp_path):
        copy = Station(id="renamed-copy")  # same instrument addresses under another id
        with pytest.raises(StationBusy, match="fake://"):
            StationLock(copy, tmp_path).acquire()
        other = Station(id="fake-bench", instruments={"supply": InstrumentConfig("supply", address="fake://2")})
        with StationLock(other, tmp_path) as lock:  # the same id on other instruments (two simulated benches)
            assert lock.held


def test_the_kernel_frees_the_lock_when_the_holder_dies(tmp_path):
    holder = subprocess.Popen(
        [sys.executable, "-c", "import sys, types; from benchgate.runner.lock import StationLock; "
         "cfg = types.SimpleNamespace(address='fake://'); "
         "held = StationLock(types.SimpleNamespace(id='x', instruments={'adc': cfg}), sys.argv[1]).acquire(); "
         "print('locked', flush=True); sys.stdin.read()", str(tmp_path)],
        stdin=subprocess.PIPE, stdout=subprocess.PIPE, text=True)
    try:
        assert holder.stdout.readline().strip() == "locked"
        with pytest.raises(StationBusy, match=f"pid {holder.pid}"):
            StationLock(Station(), tmp_path).acquire()
    finally:
        holder.kill()  # like kill -9: no clean-up code runs
        holder.communicate(timeout=10)
    with StationLock(Station(), tmp_path) as lock:
        assert lock.held
