"""The understudy bench: simulated boards on a real pseudo-terminal and loopback SCPI ports.

``UnderstudyBench`` (in ``sim.bench``) is imported lazily, so ``import benchgate.sim`` stays light.
"""

from __future__ import annotations

__all__ = ["UnderstudyBench"]


def __getattr__(name: str):
    if name == "UnderstudyBench":
        from benchgate.sim.bench import UnderstudyBench

        return UnderstudyBench
    raise AttributeError(f"module 'benchgate.sim' has no attribute {name!r}")
