"""Checks across steps: a plan that loads is a plan that can run.

- step ids are unique;
- every instrument a step uses is in the plan's ``requires``;
- a ``power_on`` capture has a supply voltage set and the output off before it;
- a capture lasts at least :data:`MIN_CYCLES` cycles at the lowest frequency its window allows
  (plus the start-up time it must wait for), samples faster than twice the highest frequency,
  and, for THD-type checks, faster than 2 · harmonics · the highest frequency.
"""

from __future__ import annotations

from benchgate.plan.fields import PlanCollector
from benchgate.plan.model import CaptureStep, ReadingStep, Step, SupplyStep
from benchgate.plan.stimulus import StimulusStep
from benchgate.units.format import format_quantity

MIN_CYCLES = 5
#: measurements that need the harmonics below Nyquist
HARMONIC_CHECKS = ("thd", "thd_n", "sinad", "snr", "sfdr", "enob")
#: measurements that need whole cycles of the waveform
CYCLE_CHECKS = ("frequency", "amplitude", "vpp", "rms", "thd", "thd_n", "sinad", "snr", "sfdr",
                "enob", "duty_cycle", "frequency_drift", "startup_time", "amplitude_dip")

Pos = dict[str, tuple[int, int]]


def _instrument_role(step: Step) -> str | None:
    if isinstance(step, SupplyStep):
        return "supply"
    if isinstance(step, (CaptureStep, ReadingStep)):
        return step.instrument
    return None


def _frequency_window(step: Step):
    for ch in step.checks:
        if ch.measurement == "frequency":
            return ch
    return None


def validate_steps(c: PlanCollector, steps: list[Step], positions: list[Pos], requires: set[str],
                   complete: bool = True) -> None:
    """Cross-step checks; ``complete`` is False when some steps had errors of their own (then
    the supply sequence is not judged, to avoid errors that only follow from those)."""
    seen: dict[str, tuple[int, int]] = {}
    plan_freq = [ch for s in steps for ch in s.checks if ch.measurement == "frequency"]
    supply_on: bool | None = False  # outputs start off: the runner switches them off first
    voltage_set = False
    for step, pos in zip(steps, positions, strict=True):
        where_id = pos.get("id", pos[""])
        if step.id in seen:
            line, col = seen[step.id]
            c.error(where_id, f"step id {step.id!r} is used twice (first at line {line}, column {col})")
        else:
            seen[step.id] = where_id
        roles = ("generator", step.instrument) if isinstance(step, StimulusStep) else (_instrument_role(step),)
        for role in roles:
            if role is not None and role not in requires:
                c.error(pos.get("instrument", pos.get("kind", pos[""])),
                        f"step {step.id!r} uses the {role}, but the plan does not require it "
                        f"(add {role} to requires)")
        if isinstance(step, SupplyStep):
            if step.voltage is not None:
                voltage_set = True
            if step.output is not None:
                supply_on = step.output
        if isinstance(step, CaptureStep):
            if step.power_on and complete:
                if "supply" not in requires:
                    c.error(pos.get("power_on", pos[""]),
                            f"step {step.id!r}: power_on switches the supply on; add supply to requires")
                if supply_on:
                    c.error(pos.get("power_on", pos[""]),
                            f"step {step.id!r}: power_on needs the supply output off before it "
                            "(add a supply step with output: off)")
                if not voltage_set:
                    c.error(pos.get("power_on", pos[""]),
                            f"step {step.id!r}: power_on needs a supply step setting the voltage first")
                supply_on = True
            _capture_timing(c, step, pos, plan_freq)


def _capture_timing(c: PlanCollector, step: CaptureStep, pos: Pos, plan_freq) -> None:
    where = pos.get("checks", pos[""])
    fcheck = _frequency_window(step)
    windows = [fcheck] if fcheck is not None else plan_freq
    names = {ch.measurement for ch in step.checks}
    startup = next((ch for ch in step.checks if ch.measurement == "startup_time"), None)
    if startup is not None and not step.power_on:
        c.error((startup.line, startup.column),
                f"step {step.id!r}: startup_time needs a capture with power_on: true")
    if fcheck is not None and (fcheck.window.low is None or fcheck.window.low <= 0):
        c.error((fcheck.line, fcheck.column),
                f"step {step.id!r}: a frequency window needs a lower limit above 0 Hz to size the capture")
        return
    harmonic = sorted(names & set(HARMONIC_CHECKS))
    if harmonic and not any(w.window.high is not None for w in windows):
        c.error(where, f"step {step.id!r}: {harmonic[0]} needs a frequency window with an upper "
                       "limit (in this step or the plan) to check the sample rate")
        return
    if not windows or not names & set(CYCLE_CHECKS):
        return
    lows = [w.window.low for w in windows if w.window.low is not None and w.window.low > 0]
    highs = [w.window.high for w in windows if w.window.high is not None]
    if lows:
        f_low = min(lows)
        wait = startup.window.high if startup is not None and startup.window.high is not None else 0.0
        need = wait + MIN_CYCLES / f_low
        if step.duration < need * (1 - 1e-9):  # not failed by rounding at the boundary
            extra = f" after a start-up of up to {format_quantity(wait, 's')}" if wait else ""
            c.error(pos.get("duration", pos.get("samples", pos[""])),
                    f"step {step.id!r}: duration {format_quantity(step.duration, 's')} is too short: "
                    f"{MIN_CYCLES} cycles at {format_quantity(f_low, 'Hz')} (the window's lowest "
                    f"frequency){extra} need at least {format_quantity(need, 's')}")
    if not (highs and (harmonic or fcheck is not None)):
        return
    f_high = max(highs)
    if step.rate is None:
        if harmonic:
            c.error(where, f"step {step.id!r}: {harmonic[0]} needs an explicit rate to check that "
                           f"{step.harmonics} harmonics fit below Nyquist")
        return
    if harmonic:
        need = 2 * step.harmonics * f_high
        if step.rate <= need:
            c.error(pos.get("rate", where),
                    f"step {step.id!r}: rate {format_quantity(step.rate, 'S/s')} is too low for "
                    f"{harmonic[0]} with {step.harmonics} harmonics up to {format_quantity(f_high, 'Hz')}: "
                    f"needs more than {format_quantity(need, 'Hz')} (or fewer harmonics)")
    elif step.rate <= 2 * f_high:
        c.error(pos.get("rate", where),
                f"step {step.id!r}: rate {format_quantity(step.rate, 'S/s')} is below twice the "
                f"highest frequency the window allows ({format_quantity(f_high, 'Hz')})")
