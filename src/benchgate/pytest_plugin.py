"""pytest plugin: run a benchgate plan's checks as pytest items on a bench station.

Registered through the ``pytest11`` entry point. Without ``--bench-station`` nothing is
collected, so ordinary test suites are unaffected.
"""

from __future__ import annotations


def pytest_addoption(parser):
    group = parser.getgroup("benchgate", "benchgate bench tests")
    group.addoption("--bench-station", default=None, metavar="STATION",
                    help="station file: collect benchgate plan files given on the command line")
    group.addoption("--bench-serial", default=None, metavar="SN", help="serial number of the unit under test")
