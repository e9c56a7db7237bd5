"""The measurement core: pure numpy functions from a :class:`Capture` to :class:`Measurement`.

No I/O, no printing, no global state. ``analyze`` runs a set of registered measurements on
one capture and returns them with the capture's warnings.
"""

from benchgate.analysis.capture import AdcInfo, Capture
from benchgate.analysis.measurement import Measurement

__all__ = [
    "AdcInfo",
    "Capture",
    "Measurement",
    "analyze",
    "Analysis",
]


def __getattr__(name):  # lazy: keep `import benchgate.analysis` light
    if name in ("analyze", "Analysis"):
        from benchgate.analysis import core

        return getattr(core, name)
    raise AttributeError(name)
