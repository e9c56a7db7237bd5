"""Shared test set-up."""

from __future__ import annotations

import pytest


@pytest.fixture(autouse=True)
def _plain_environment(monkeypatch):
    # Plain output in tests; rich's live display is exercised explicitly where needed.
    monkeypatch.setenv("NO_COLOR", "1")
    # CI=true implies unattended runs; tests that need it set it themselves.
    monkeypatch.delenv("CI", raising=False)
