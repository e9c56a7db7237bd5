"""Test plans: the YAML format, validation with positions, and windows derived from circuits.

Kept light on purpose (``benchgate.judge`` imports ``benchgate.plan.limits``): YAML, numpy and
the loader are imported only when a plan is loaded.
"""

from __future__ import annotations

__all__ = ["load_plan", "loads_plan", "Plan", "Check", "Hazard", "Window"]


def load_plan(path):
    """Read and validate a plan file; raises :class:`benchgate.errors.PlanErrors`."""
    from benchgate.plan.loader import load_plan as _load

    return _load(path)


def loads_plan(text, file="<plan>"):
    """Read and validate plan text; raises :class:`benchgate.errors.PlanErrors`."""
    from benchgate.plan.loader import loads_plan as _loads

    return _loads(text, file)


def __getattr__(name):
    if name in ("Plan", "Check", "Hazard", "Step", "SupplyStep", "WaitStep", "PromptStep",
                "CaptureStep", "ReadingStep"):
        from benchgate.plan import model

        return getattr(model, name)
    if name == "Window":
        from benchgate.plan.limits import Window

        return Window
    raise AttributeError(name)
