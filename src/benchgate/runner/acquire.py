"""Taking a capture step's record, with the supply switched on inside it for a start-up capture.

A streaming recorder (the serial ADC) starts its record when samples start arriving; a triggered
one (a digitizer) when it is armed. For a ``power_on`` capture the acquisition starts first and
the supply is switched on only once the record runs, so the record holds the whole start-up; the
instant of the switch-on in the record's own time is stored in the capture's metadata
(``power_on_at`` ± ``power_on_halfwidth``), and the analysis times the start-up from it.
"""

from __future__ import annotations

import threading
from collections.abc import Callable
from typing import TYPE_CHECKING, Any

from benchgate.analysis.capture import Capture
from benchgate.instruments.base import Digitizer, Recorder
from benchgate.instruments.preview import whole_preview

if TYPE_CHECKING:
    from benchgate.clock import Clock
    from benchgate.instruments.base import Supply
    from benchgate.instruments.preview import CapturePreview
    from benchgate.plan.model import CaptureStep
    from benchgate.runner.attendant import RunListener

#: how long (clock seconds) a unit is left unpowered before a repeated start-up capture
POWER_CYCLE_OFF_S = 0.5


class CaptureProgress:
    """The progress callback a recorder gets for one capture: each fraction goes to the
    listener's ``progress`` with the time left, each preview of the samples so far to its
    ``capture_preview`` (a recorder that streams sends them; see instruments/preview.py).
    ``seen(fraction)`` is told every fraction first."""

    def __init__(self, hooks: RunListener, text: str, duration: float,
                 seen: Callable[[float], None] | None = None):
        self.hooks = hooks
        self.text = text
        self.duration = duration
        self.seen = seen

    def __call__(self, fraction: float, text: str = "") -> None:
        if self.seen is not None:
            self.seen(fraction)
        self.hooks.progress(fraction, self.text, self.duration * (1 - fraction))

    def preview(self, preview: CapturePreview) -> None:
        self.hooks.capture_preview(preview)


class Acquisition:
    """One capture step's record on ``recorder`` (notes go to ``notes``)."""

    def __init__(self, step: CaptureStep, recorder: Recorder, *, supply: Supply | None, clock: Clock,
                 hooks: RunListener, notes: list[str], sleep: Callable[[float, str], None]):
        self.step = step
        self.recorder = recorder
        self.supply = supply
        self.clock = clock
        self.hooks = hooks
        self.notes = notes
        self.sleep = sleep

    def _progress_text(self) -> str:
        return f"capture {self.step.channel}"

    def take(self) -> Capture:
        step = self.step
        first: list[float] = []  # clock time and fraction delivered at the first progress report
        started = threading.Event()

        def seen(fraction: float) -> None:
            if not first:  # a driver's report at 0 marks the start of acquisition itself
                first.extend((self.clock.monotonic(), float(fraction)))
            if fraction > 0:  # samples are arriving: the recorder really runs
                started.set()

        progress = CaptureProgress(self.hooks, self._progress_text(), step.duration, seen)

        rng = getattr(step, "range", None) if isinstance(self.recorder, Digitizer) else None
        options: dict[str, Any] = {}
        if rng is not None:
            options["range"] = rng  # a digitizer's input range (an ADC's is fixed by its reference)
        if not step.power_on or self.supply is None:
            return self._capture(progress, options)
        supply = self.supply
        # Acquisition first, then the supply: the record must hold the start-up transient. The
        # driver's first progress call means samples are arriving; only then is the supply
        # switched on (never before, which could hide a slow start behind the record's start).
        self._power_down_first(supply)
        if isinstance(self.recorder, Digitizer):  # a triggered recorder: its record starts when armed
            return self._armed(self.recorder, supply, rng)
        result: dict[str, Capture] = {}
        failure: list[BaseException] = []

        def work() -> None:
            try:
                result["capture"] = self._capture(progress, options)
            except BaseException as exc:  # handed to the main thread below
                failure.append(exc)

        worker = threading.Thread(target=work, name=f"capture-{step.id}", daemon=True)
        worker.start()
        while not started.is_set() and worker.is_alive():
            started.wait(timeout=0.02)
        power_on: dict[str, float] = {}
        if started.is_set() and not failure:
            t_sent = self.clock.monotonic()
            supply.output(True)
            t_ack = self.clock.monotonic()
            t_first, delivered = first
            # Where the switch-on falls in the record's own time: the part already delivered at
            # the first progress report, plus the clock time from then to the middle of the
            # output command; half the command's duration bounds where in it the output rose.
            power_on["power_on_at"] = delivered * step.duration + (t_sent - t_first) + (t_ack - t_sent) / 2
            power_on["power_on_halfwidth"] = (t_ack - t_sent) / 2
            self.notes.append(
                f"supply output switched on {(t_ack - t_first) * 1e3:.1f} ms after the first samples "
                f"arrived, {power_on['power_on_at'] * 1e3:.1f} ms ± {power_on['power_on_halfwidth'] * 1e3:.1f} ms "
                "into the record; start-up is timed from there")
        while worker.is_alive():
            worker.join(timeout=0.05)
        if failure:
            raise failure[0]
        if not started.is_set():
            self.notes.append("the recorder reported no progress; the supply was not switched on")
        capture = result["capture"]
        return capture.with_metadata(**power_on) if power_on else capture

    def _capture(self, progress: CaptureProgress, options: dict[str, Any]) -> Capture:
        step = self.step
        if options:  # only a digitizer takes options (its range), which its capture accepts
            capture: Callable[..., Capture] = self.recorder.capture
            return capture(step.channel, duration=step.duration, rate=step.rate, progress=progress, **options)
        return self.recorder.capture(step.channel, duration=step.duration, rate=step.rate, progress=progress)

    def _armed(self, recorder: Digitizer, supply: Supply, rng: float | None) -> Capture:
        """Power-on capture with a triggered recorder: set up, arm, switch the supply on, wait, fetch.

        The record starts somewhere inside the arm command, the switch-on somewhere inside the
        output command; ``power_on_at`` is the middle of the interval that leaves, and
        ``power_on_halfwidth`` its half-width.
        """
        step = self.step
        setup = recorder.setup(step.channel, duration=step.duration, rate=step.rate, range=rng)
        t_arm = self.clock.monotonic()
        recorder.arm()
        t_armed = self.clock.monotonic()
        self.hooks.progress(0.0, self._progress_text(), step.duration)
        # the record is handed over only when complete: a picture of nothing yet, then of all
        points = int(setup["points"])
        self.hooks.capture_preview(whole_preview(step.channel, float(setup["rate"]), (), points))
        t_sent = self.clock.monotonic()
        supply.output(True)
        t_ack = self.clock.monotonic()
        earliest, latest = t_sent - t_armed, t_ack - t_arm
        power_on = {"power_on_at": (earliest + latest) / 2, "power_on_halfwidth": (latest - earliest) / 2}
        self.notes.append(
            f"supply output switched on {power_on['power_on_at'] * 1e3:.1f} ms ± "
            f"{power_on['power_on_halfwidth'] * 1e3:.1f} ms after the {step.instrument} was armed; "
            "start-up is timed from there")
        recorder.wait()
        capture = recorder.to_capture(recorder.fetch())
        self.hooks.progress(1.0, self._progress_text(), 0.0)
        self.hooks.capture_preview(whole_preview(step.channel, capture.sample_rate, capture.samples, points))
        return capture.with_metadata(**power_on)

    def _power_down_first(self, supply: Supply) -> None:
        """A start-up capture needs an unpowered unit (a retry finds the supply on): power cycle."""
        try:
            on = bool(supply.output_state())
        except Exception:  # cannot tell: switch off to be sure
            on = True
        if on:
            supply.output(False)
            self.notes.append(f"supply output switched off for {POWER_CYCLE_OFF_S:g} s before the "
                              "start-up capture (the unit must start from unpowered)")
            self.sleep(POWER_CYCLE_OFF_S, "power off before the start-up capture")
