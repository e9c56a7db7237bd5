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
    with pytest.raises(StationBusy, match=r"^station busy: station 'fake-bench' .*pid \d+"):
        StationLock(Station(), tmp_path).acquire()
    first.release()
    with StationLock(Station(), tmp_path) as again:
        assert again.held


def test_another_station_file_on_the_same_instruments_is_busy_too(tmp_path):
    with StationLock(Station(), tmp_path):
        copy = Station(id="renamed-copy")  # same instrument addresses under another id
        with pytest.raises(StationBusy, match="instrument fake://"):
            StationLock(copy, tmp_path).acquire()
        other = Station(id="other", instruments={"supply": InstrumentConfig("supply", address="fake://2")})
        with StationLock(other, tmp_path) as lock:
            assert lock.held


def test_the_kernel_frees_the_lock_when_the_holder_dies(tmp_path):
    holder = subprocess.Popen(
        [sys.executable, "-c", "import sys, types; from benchgate.runner.lock import StationLock; "
         "held = StationLock(types.SimpleNamespace(id='fake-bench', instruments={}), sys.argv[1]).acquire(); "
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
