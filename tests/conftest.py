"""Shared test set-up."""

from __future__ import annotations

import pytest


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
