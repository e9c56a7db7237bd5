"""The virtual bench: simulated boards on a real pseudo-terminal and loopback SCPI ports.

``VirtualBench`` (in ``sim.bench``) is imported lazily, so ``import benchgate.sim`` stays light.
"""

from __future__ import annotations

__all__ = ["VirtualBench"]


def __getattr__(name: str):
    if name == "VirtualBench":
        from benchgate.sim.bench import VirtualBench

        return VirtualBench
    raise AttributeError(f"module 'benchgate.sim' has no attribute {name!r}")
