"""The person at the bench, as the runner sees them: one typed interface, several faces.

Everything a run needs from a person goes through an :class:`Attendant`:

announce
    :meth:`~Attendant.announce` a :class:`Notice` (a caution, a hazard, a warning, a line of
    information) and :meth:`~Attendant.alarm` for the one thing that must not be missed (a supply
    that could not be confirmed off).
ask
    :meth:`~Attendant.ask_yes_no`, :meth:`~Attendant.wait_until_done`, :meth:`~Attendant.ask_retry`
    and :meth:`~Attendant.ask_serial`. A face with nobody to ask raises :class:`NobodyAnswers`.
acknowledge
    :meth:`~Attendant.acknowledge` one hazard before anything is switched on.
progress
    the :class:`RunListener` calls, as the run goes (the events file listens to the same calls),
    among them :meth:`~RunListener.capture_preview`: what a capture being taken looks like so
    far (bounded in size, at most ten a second; a face may ignore it).
result
    :meth:`~RunListener.run_finished` with the unit record and the files written.

Faces: the terminal (``benchgate.cli.terminal``: rich or plain lines, stdin), unattended runs
(``benchgate.cli.terminal``: lines, never a question), the pytest plugin, and :class:`Silent` here
(shows nothing, asks nobody: the demo and library use). The runner itself never prints, never
reads stdin and never names a command-line option: a refusal that a face can help with carries a
:class:`Hint` the face phrases in its own words.
"""

from __future__ import annotations

import enum
from collections.abc import Mapping
from dataclasses import dataclass
from pathlib import Path
from typing import TYPE_CHECKING, Literal, Protocol

from benchgate.errors import NobodyAnswers

if TYPE_CHECKING:
    from benchgate.instruments.preview import CapturePreview
    from benchgate.plan.model import Step
    from benchgate.record import CheckRecord, StepRecord, UnitRecord

__all__ = ["Attendant", "Fanout", "Hint", "NobodyAnswers", "Notice", "NoticeKind", "Reply", "RunListener", "Silent"]

NoticeKind = Literal["info", "caution", "hazard", "warning"]


@dataclass(frozen=True)
class Notice:
    """Something the person at the bench should read (not answer)."""

    kind: NoticeKind
    text: str

    def line(self) -> str:
        """The notice as one line of text, with its kind in front when it has one."""
        prefix = {"info": "", "caution": "CAUTION: ", "hazard": "HAZARD ", "warning": "WARNING: "}[self.kind]
        return prefix + self.text


@dataclass(frozen=True)
class Reply:
    """An answer to a question that may carry a remark (``ask_retry``)."""

    yes: bool
    remark: str = ""


class Hint(enum.StrEnum):
    """What a face can offer when the runner refuses (each face words it its own way)."""

    ACCEPT_HAZARDS = "accept_hazards"  # the hazards could be accepted in advance for this run
    ALLOW_EXPIRED_CALIBRATION = "allow_expired_calibration"  # the run could go on, recorded
    SERIAL_NEEDED = "serial_needed"  # a serial number has to be given up front


class RunListener(Protocol):
    """What happens during a run, as it happens (the attendant and the events file)."""

    def announce(self, notice: Notice) -> None: ...
    def alarm(self, text: str) -> None: ...
    def run_started(self, record: UnitRecord, total_steps: int) -> None: ...
    def step_started(self, index: int, total: int, step: Step) -> None: ...
    def progress(self, fraction: float, text: str, time_left: float | None) -> None: ...
    def capture_preview(self, preview: CapturePreview) -> None: ...
    def check(self, check: CheckRecord) -> None: ...
    def step_finished(self, step: StepRecord) -> None: ...
    def run_finished(self, record: UnitRecord, paths: Mapping[str, Path]) -> None: ...


class Attendant(RunListener, Protocol):
    """The person at the bench (see the module docstring)."""

    def ask_yes_no(self, question: str) -> bool:
        """True for yes; asks again until the answer is yes or no."""
        ...

    def wait_until_done(self, instruction: str) -> str:
        """Show an instruction and wait until the person says it is done; returns any remark."""
        ...

    def ask_retry(self, question: str) -> Reply:
        """May a step that did not pass be tried again? (a remark is kept in the record)"""
        ...

    def ask_serial(self, prompt: str) -> str | None:
        """One serial number (a scanner types it and presses Enter), or None for no more units."""
        ...

    def acknowledge(self, name: str, text: str) -> bool:
        """Did the person acknowledge hazard ``name`` (shown already) in the face's own way?"""
        ...

    def close(self) -> None: ...


class NobodyThere:
    """The answers of a face with nobody at the bench (a CI job): every question raises
    :class:`NobodyAnswers` and no hazard is acknowledged. Faces that show something mix it in."""

    def ask_yes_no(self, question: str) -> bool:
        raise NobodyAnswers(question)

    def wait_until_done(self, instruction: str) -> str:
        raise NobodyAnswers(instruction)

    def ask_retry(self, question: str) -> Reply:
        raise NobodyAnswers(question)

    def acknowledge(self, name: str, text: str) -> bool:
        return False

    def capture_preview(self, preview: CapturePreview) -> None:
        pass  # nobody watches the picture either


class Silent(NobodyThere):
    """Shows nothing and asks nobody: every question raises :class:`NobodyAnswers`."""

    def announce(self, notice: Notice) -> None:
        pass

    def alarm(self, text: str) -> None:
        pass

    def run_started(self, record: UnitRecord, total_steps: int) -> None:
        pass

    def step_started(self, index: int, total: int, step: Step) -> None:
        pass

    def progress(self, fraction: float, text: str, time_left: float | None) -> None:
        pass

    def check(self, check: CheckRecord) -> None:
        pass

    def step_finished(self, step: StepRecord) -> None:
        pass

    def run_finished(self, record: UnitRecord, paths: Mapping[str, Path]) -> None:
        pass

    def ask_serial(self, prompt: str) -> str | None:
        return None

    def close(self) -> None:
        pass


class Fanout:
    """Passes every :class:`RunListener` call to several listeners (the attendant, the events file)."""

    def __init__(self, *listeners: RunListener | None):
        self.listeners: list[RunListener] = [x for x in listeners if x is not None]

    def announce(self, notice: Notice) -> None:
        for x in self.listeners:
            x.announce(notice)

    def alarm(self, text: str) -> None:
        for x in self.listeners:
            x.alarm(text)

    def run_started(self, record: UnitRecord, total_steps: int) -> None:
        for x in self.listeners:
            x.run_started(record, total_steps)

    def step_started(self, index: int, total: int, step: Step) -> None:
        for x in self.listeners:
            x.step_started(index, total, step)

    def progress(self, fraction: float, text: str, time_left: float | None) -> None:
        for x in self.listeners:
            x.progress(fraction, text, time_left)

    def capture_preview(self, preview: CapturePreview) -> None:
        for x in self.listeners:
            x.capture_preview(preview)

    def check(self, check: CheckRecord) -> None:
        for x in self.listeners:
            x.check(check)

    def step_finished(self, step: StepRecord) -> None:
        for x in self.listeners:
            x.step_finished(step)

    def run_finished(self, record: UnitRecord, paths: Mapping[str, Path]) -> None:
        for x in self.listeners:
            x.run_finished(record, paths)
