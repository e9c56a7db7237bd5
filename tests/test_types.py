"""The typed seams stay typed: mypy --strict on the runner, the judge and the run record
(the packages and settings are in pyproject.toml, [tool.mypy])."""

from __future__ import annotations

import importlib.util
import subprocess
import sys
from pathlib import Path

import pytest

REPO = Path(__file__).resolve().parents[1]


def test_mypy_strict_clean():
    if importlib.util.find_spec("mypy") is None:
        pytest.skip("mypy is not installed (it comes with the test extra)")
    done = subprocess.run([sys.executable, "-m", "mypy", "--no-incremental", "--config-file", "pyproject.toml"],
                          cwd=REPO, capture_output=True, text=True)
    assert done.returncode == 0, done.stdout + done.stderr
