"""Shared set-up for the SCPI driver tests: a loopback ScpiBench and station entries for it."""

from __future__ import annotations

from benchgate.clock import ManualClock
from benchgate.instruments.station import InstrumentConfig
from benchgate.sim.scpi_server import ConstantBackend, ScpiBench

KINDS = {"supply": "scpi-supply", "dmm": "scpi-dmm", "counter": "scpi-counter",
         "digitizer": "scpi-digitizer", "generator": "scpi-generator"}


def make_bench(**backend_args) -> ScpiBench:
    return ScpiBench(ConstantBackend(**backend_args), clock=ManualClock()).start()


def config_for(bench: ScpiBench, role: str, *, timeout: float = 0.3, **options) -> InstrumentConfig:
    """A station entry for ``role`` on ``bench`` (short timeout: tests stay fast)."""
    return InstrumentConfig(role=role, kind=KINDS[role], address=bench.resources[role],
                            timeout=timeout, options=options, file="station.yaml", line=7)
