"""An adaptive capture step: capture in blocks, re-measure after each, stop once decided.

The recorder hands over its growing capture at each look (``capture_growing``); the checks are
measured on it and given to the sequential rule (:mod:`benchgate.judge.sequential`), which says
whether every check is decided with the per-look error budget. The returned capture carries
the whole look-by-look story in its metadata (``adaptive``): per check the value and U at each
look, the budget spent, and why the capture stopped. The runner then analyses and judges the
returned capture exactly as a fixed-length one.
"""

from __future__ import annotations

import inspect
from collections.abc import Callable, Sequence
from typing import Any, Protocol, runtime_checkable

from benchgate.analysis._growing import WORTH_SAMPLES, GrowingFit
from benchgate.analysis.capture import Capture
from benchgate.errors import BenchgateError
from benchgate.judge.sequential import SequentialState, look_schedule, rule_alpha


@runtime_checkable
class GrowingRecorder(Protocol):
    """A recorder that can hand over its capture while capturing (the serial ADC)."""

    def capture_growing(self, channel: str, *, looks: Sequence[float], rate: float | None = None,
                        progress: Any = None, decide: Callable[[Capture], bool]) -> Capture: ...


def _takes_growing(analyze: Callable[..., Any]) -> bool:
    """Whether the analysis function accepts the growing capture's kept sums (``growing=``)."""
    try:
        return "growing" in inspect.signature(analyze).parameters
    except (TypeError, ValueError):
        return False


def step_alpha(step: Any, decision: str, max_risk: float | None) -> float:
    """The smallest total α over the step's checks (each by its own rule and max_risk)."""
    return min(rule_alpha(c.window.decision or decision,
                          c.window.max_risk if c.window.max_risk is not None else max_risk)
               for c in step.checks)


def acquire_adaptive(instrument: Any, step: Any, decision: str, max_risk: float | None,
                     analyze: Callable[..., Any], progress: Any = None) -> Capture:
    """Capture ``step`` adaptively on ``instrument``; the capture it stopped at, with the story
    of its looks in ``metadata["adaptive"]``."""
    a = step.adaptive
    looks = look_schedule(a.shortest, a.longest, a.block)
    state = SequentialState(looks, step_alpha(step, decision, max_risk))
    names = [c.measurement for c in step.checks]
    # the looks are one growing capture: for a long one the tone's fit keeps its sums from look
    # to look (benchgate.analysis._growing; the same result as fitting each look afresh). For a
    # shorter one that costs more than the fit's own passes, so every look is analysed afresh.
    longest = a.longest * step.rate if step.rate else 0.0
    keep = _takes_growing(analyze) and longest >= WORTH_SAMPLES
    reuse: dict[str, Any] = {"growing": GrowingFit()} if keep else {}

    def results(capture: Capture) -> dict[str, tuple[float | None, float | None, float | None, float | None]]:
        try:
            ms = analyze(capture, names, harmonics=step.harmonics, **reuse).measurements
        except (BenchgateError, ValueError):
            ms = {}  # nothing measured: nothing decided at this look
        out = {}
        for c in step.checks:
            m = ms.get(c.measurement)
            ok = m is not None and m.valid
            out[c.measurement] = (m.value if ok else None, m.uncertainty if ok else None,
                                  c.window.low, c.window.high)
        return out

    def decide(capture: Capture) -> bool:
        # the look this capture belongs to (a recorder may skip a look it had no time for;
        # that look's error budget then stays unspent)
        j = min(range(len(looks) - 1), key=lambda i: abs(looks[i] - capture.duration))
        return state.look(j, results(capture))

    if isinstance(instrument, GrowingRecorder) and len(looks) > 1:
        capture = instrument.capture_growing(step.channel, looks=looks, rate=step.rate,
                                             progress=progress, decide=decide)
    else:
        capture = instrument.capture(step.channel, duration=looks[-1], rate=step.rate, progress=progress)
    if not state.stopped:  # the longest capture: its look, judged as a fixed-length capture
        looked = len(next(iter(state.looks.values()), []))
        state.look(len(looks) - 1, results(capture))
        if looked == 0 and len(looks) > 1:
            state.stopped = (f"the recorder cannot hand over its capture while capturing; captured "
                             f"{capture.duration:g} s and judged it as a fixed-length capture")
        elif looked < len(looks) - 1:
            state.stopped += (f" ({looked} of the {len(looks) - 1} earlier looks were made; the others "
                              "passed while the analysis ran, their error budget unspent)")
    return capture.with_metadata(adaptive={**state.to_dict(), "record_seconds": capture.duration})
