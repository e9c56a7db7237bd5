"""Shared test set-up."""

from __future__ import annotations

import pytest
from hypothesis import settings

# Property tests draw from a fixed seed (derandomized): the suite finds the same examples on every
# run, so a CI result is reproducible. Explore new examples with --hypothesis-profile=explore.
settings.register_profile("fixed", derandomize=True)
settings.register_profile("explore", derandomize=False)
settings.load_profile("fixed")


@pytest.fixture(autouse=True, scope="session")
def _own_station_locks(tmp_path_factory):
    # Station locks (benchgate.runner.lock) of this test session only: test suites running at the
    # same time on one machine use the same station ids and must not see each other as busy.
    # Set in os.environ so benchgate subprocesses started by tests inherit it.
    import os

    previous = os.environ.get("BENCHGATE_RUNTIME_DIR")
    os.environ["BENCHGATE_RUNTIME_DIR"] = str(tmp_path_factory.mktemp("runtime"))
    yield
    if previous is None:
        os.environ.pop("BENCHGATE_RUNTIME_DIR", None)
    else:
        os.environ["BENCHGATE_RUNTIME_DIR"] = previous


@pytest.fixture(autouse=True)
def _plain_environment(monkeypatch):
    # Plain output in tests; rich's live display is exercised explicitly where needed.
    monkeypatch.setenv("NO_COLOR", "1")
    # CI=true implies unattended runs; tests that need it set it themselves.
    monkeypatch.delenv("CI", raising=False)
