"""The plan as the program sees it: frozen dataclasses, values in SI base units.

Each field carries in its ``metadata`` how it is written in YAML (key, type, unit, allowed
values, documentation). The loader reads plans with it and :mod:`benchgate.plan.schema`
generates the JSON Schema from it, so the two cannot drift apart.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

from benchgate.common.names import CAPABILITIES, READING_UNITS
from benchgate.plan.limits import Window

STEP_KINDS = ("supply", "wait", "prompt", "capture", "reading", "tone", "sweep", "level_sweep")
#: measurements an adaptive capture may decide before its longest capture: estimates that
#: converge as the capture grows and state their uncertainty. Start-up time, drift, dips,
#: peak-to-peak and SFDR (extremes over the whole capture) need the whole capture.
ADAPTIVE_MEASUREMENTS = ("frequency", "amplitude", "rms", "dc_offset", "thd", "thd_n", "sinad",
                         "snr", "enob", "duty_cycle")
#: decision rules that state a risk an adaptive capture can stop on
ADAPTIVE_RULES = ("guarded", "risk")
ADAPTIVE_KEYS = ("shortest", "longest", "block")
MAX_LOOKS = 200  # re-measurements of one adaptive capture
ON_FAIL = ("stop", "continue")
DECISIONS = ("simple", "guarded", "risk")
MAX_STEPS = 500  # keeps loading and `inspect` within a few seconds; real plans have tens
MAX_SAMPLES = 50_000_000  # samples in one capture (rate × duration)
#: hazards a plan may declare; each needs an explicit acknowledgement before a run.
HAZARD_NAMES = ("mains", "high_voltage", "hot_surfaces", "stored_energy", "moving_parts",
                "optical_radiation", "other")


def spec(doc: str, *, kind: str = "str", key: str | None = None, unit: str | None = None,
         choices: tuple[str, ...] | None = None, required: bool = False,
         minimum: float | None = None, maximum: float | None = None, yaml: bool = True) -> dict[str, Any]:
    """Metadata for one model field.

    kind: ``str`` | ``text`` (multi-line) | ``int`` | ``bool`` | ``quantity`` (number with
    ``unit``) | ``choice`` (one of ``choices``) | ``checks`` | ``limit`` | ``list`` | ``hazards``.
    """
    return {"doc": doc, "kind": kind, "key": key, "unit": unit, "choices": choices,
            "required": required, "minimum": minimum, "maximum": maximum, "yaml": yaml}


@dataclass(frozen=True)
class Hazard:
    """A danger the operator must acknowledge before the first step."""

    name: str = field(metadata=spec("kind of hazard", kind="choice", choices=HAZARD_NAMES, required=True))
    text: str = field(metadata=spec("what the hazard is and how to stay safe", kind="text", required=True))


@dataclass(frozen=True)
class Check:
    """One measurement judged against one window."""

    measurement: str
    window: Window
    line: int | None = None
    column: int | None = None


_COMMON = {
    "id": spec("step id: letters, digits, '-', '_' or '.'; unique in the plan (used in file names)",
               required=True),
    "title": spec("what the step does, in words the operator reads", required=True),
    "kind": spec("step kind", kind="choice", choices=STEP_KINDS, required=True),
    "on_fail": spec("what to do when a check of this step fails or errors: stop the run or "
                    "continue with the next step (default from `defaults`, else continue; a "
                    "supply_current reading defaults to stop)", kind="choice", choices=ON_FAIL),
    "retries": spec("how many times to repeat the step if its checks do not pass", kind="int",
                    minimum=0, maximum=10),
    "retry_prompt": spec("instruction shown to the operator before each retry", kind="text"),
}


@dataclass(frozen=True, kw_only=True)
class Step:
    """Fields every step has."""

    id: str = field(metadata=_COMMON["id"])
    title: str = field(metadata=_COMMON["title"])
    kind: str = field(default="", metadata=_COMMON["kind"])
    on_fail: str = field(default="continue", metadata=_COMMON["on_fail"])
    retries: int = field(default=0, metadata=_COMMON["retries"])
    retry_prompt: str | None = field(default=None, metadata=_COMMON["retry_prompt"])

    @property
    def checks(self) -> tuple[Check, ...]:
        return ()


@dataclass(frozen=True, kw_only=True)
class SupplyStep(Step):
    """Set the bench supply: voltage, current limit, output on or off."""

    kind: str = field(default="supply", metadata=_COMMON["kind"])
    voltage: float | None = field(default=None, metadata=spec(
        "output voltage set point", kind="quantity", unit="V", minimum=0, maximum=60))
    current_limit: float | None = field(default=None, metadata=spec(
        "current limit", kind="quantity", unit="A", minimum=0, maximum=10))
    output: bool | None = field(default=None, metadata=spec(
        "switch the output on (true/on) or off (false/off); absent: unchanged", kind="bool"))


@dataclass(frozen=True, kw_only=True)
class WaitStep(Step):
    """Wait: a warm-up or settling time."""

    kind: str = field(default="wait", metadata=_COMMON["kind"])
    seconds: float = field(default=0.0, metadata=spec(
        "how long to wait", kind="quantity", key="duration", unit="s", minimum=0,
        maximum=86400, required=True))


@dataclass(frozen=True, kw_only=True)
class PromptStep(Step):
    """An instruction to the operator, optionally a yes/no question."""

    kind: str = field(default="prompt", metadata=_COMMON["kind"])
    text: str = field(default="", metadata=spec("the instruction or question", kind="text",
                                                required=True))
    ask: bool = field(default=False, metadata=spec(
        "ask a yes/no question instead of waiting for Enter", kind="bool"))
    expect: str | None = field(default=None, metadata=spec(
        "the answer that lets the run continue (with ask; default yes)", kind="choice",
        choices=("yes", "no")))
    unattended_answer: str | None = field(default=None, metadata=spec(
        "answer used in unattended runs (with ask); without it an unattended run stops here",
        kind="choice", choices=("yes", "no")))
    on_wrong_answer: str = field(default="abort", metadata=spec(
        "an answer other than expect: abort the unit there (default; nothing more is switched "
        "on) or continue (the step is recorded as failed and on_fail applies)", kind="choice",
        choices=("abort", "continue")))


@dataclass(frozen=True)
class Adaptive:
    """An adaptive capture: capture in blocks, stop once every check is decided (judge/sequential)."""

    shortest: float = field(metadata=spec("the first look: shortest capture", kind="quantity", unit="s",
                                          minimum=0, maximum=600, required=True))
    longest: float = field(metadata=spec("the longest capture (the step's duration); judged as a "
                                         "fixed-length capture when reached", kind="quantity", unit="s",
                                         minimum=0, maximum=600, required=True))
    block: float | None = field(default=None, metadata=spec(
        "capture added between looks (default: the shortest capture)", kind="quantity", unit="s",
        minimum=0, maximum=600))

    def to_dict(self) -> dict[str, Any]:
        return {"shortest": self.shortest, "longest": self.longest, "block": self.block}


@dataclass(frozen=True, kw_only=True)
class CaptureStep(Step):
    """Capture a waveform and judge measurements made on it."""

    kind: str = field(default="capture", metadata=_COMMON["kind"])
    instrument: str = field(default="adc", metadata=spec(
        "which recorder takes the capture", kind="choice", choices=("adc", "digitizer")))
    channel: str = field(default="", metadata=spec("channel name on the recorder (required here or in defaults.capture)"))
    rate: float | None = field(default=None, metadata=spec(
        "sample rate (Hz or S/s); absent: the instrument's default", kind="quantity", unit="Hz",
        minimum=0, maximum=1e10))
    duration: float = field(default=0.0, metadata=spec(
        "capture length (or give `samples` with `rate`)", kind="quantity", unit="s", minimum=0,
        maximum=600))
    range: float | None = field(default=None, metadata=spec(
        "input range (full-scale voltage) when the recorder has ranges", kind="quantity", unit="V",
        minimum=0, maximum=1000))
    power_on: bool = field(default=False, metadata=spec(
        "switch the supply output on right after the capture starts, to capture the start-up",
        kind="bool"))
    harmonics: int = field(default=10, metadata=spec(
        "harmonics summed for THD and excluded from SNR", kind="int", minimum=1, maximum=50))
    checks: tuple[Check, ...] = field(default=(), metadata=spec(
        "measurement name -> limit", kind="checks"))
    adaptive: Adaptive | None = field(default=None, metadata=spec(
        "capture in blocks and stop as soon as every check is decided under the plan's decision "
        "rule (guarded or risk), with an error bound that holds under the repeated looks: "
        "{shortest, longest, block}; the longest capture replaces duration", kind="adaptive"))


@dataclass(frozen=True, kw_only=True)
class ReadingStep(Step):
    """Take one reading from a dmm, counter or supply and judge it."""

    kind: str = field(default="reading", metadata=_COMMON["kind"])
    instrument: str = field(default="", metadata=spec(
        "instrument taking the reading (default: the one that can)", kind="choice",
        choices=("dmm", "counter", "supply")))
    quantity: str = field(default="", metadata=spec(
        "what to read", kind="choice", choices=tuple(READING_UNITS), required=True))
    settle: float = field(default=0.0, metadata=spec(
        "time to wait before reading", kind="quantity", unit="s", minimum=0, maximum=600))
    checks: tuple[Check, ...] = field(default=(), metadata=spec(
        "the limit for the reading", kind="limit", key="limit"))


STEP_CLASSES: dict[str, type[Step]] = {
    "supply": SupplyStep, "wait": WaitStep, "prompt": PromptStep,
    "capture": CaptureStep, "reading": ReadingStep,
}


@dataclass(frozen=True)
class Plan:
    """A validated test plan. Values are in SI base units; windows are final."""

    id: str = field(metadata=spec("plan id (letters, digits, '-', '_', '.')", key="plan",
                                  required=True))
    version: str = field(metadata=spec("plan version (text; quote it: \"1.2\")", required=True))
    product: str = field(metadata=spec("the product (board) the plan tests", required=True))
    description: str = field(default="", metadata=spec("what the plan checks and why", kind="text"))
    cautions: tuple[str, ...] = field(default=(), metadata=spec(
        "shown to the operator before the first step", kind="list"))
    hazards: tuple[Hazard, ...] = field(default=(), metadata=spec(
        "dangers needing explicit acknowledgement before a run", kind="hazards"))
    requires: frozenset[str] = field(default=frozenset(), metadata=spec(
        "station capabilities the plan needs", kind="list", choices=CAPABILITIES))
    decision: str = field(default="simple", metadata=spec(
        "decision rule (ILAC-G8): simple acceptance, guarded (guard band w = U) or risk (pass or "
        "fail only when the specific risk of that decision is below max_risk, JCGM 106)",
        kind="choice", choices=DECISIONS))
    max_risk: float | None = field(default=None, metadata=spec(
        "largest acceptable specific risk of a decision under the risk rule, e.g. '1 %' (stored as "
        "a fraction); a check's limit may set its own", kind="quantity", unit="%", minimum=1e-9,
        maximum=49.9))
    steps: tuple[Step, ...] = field(default=(), metadata=spec("the steps, in order", kind="steps",
                                                              required=True))
    hash: str = field(default="", metadata=spec("content hash", yaml=False))
    path: str = field(default="", metadata=spec("file the plan came from", yaml=False))
    #: notes that are not errors (a component value that is not a preferred value …), as
    #: ``file:line:col: note`` lines.
    notes: tuple[str, ...] = field(default=(), metadata=spec("notes", yaml=False))

    def step(self, step_id: str) -> Step:
        for s in self.steps:
            if s.id == step_id:
                return s
        raise KeyError(step_id)


#: keys of the `defaults` mapping -> spec
DEFAULTS_SPEC: dict[str, dict[str, Any]] = {
    "on_fail": _COMMON["on_fail"],
    "retries": _COMMON["retries"],
    "capture": spec("defaults for capture steps: instrument, channel, rate, duration, range, "
                    "harmonics", kind="capture_defaults"),
    "monte_carlo": spec("defaults for from_circuit Monte Carlo: draws, seed, distribution",
                        kind="monte_carlo"),
}

CAPTURE_DEFAULT_KEYS = ("instrument", "channel", "rate", "duration", "range", "harmonics")


# the generator-driven step kinds live in their own module, which builds on Step and spec above
# and adds its classes to STEP_CLASSES when it is imported (here, whichever module comes first)
from benchgate.plan import stimulus as _stimulus  # noqa: E402, F401
