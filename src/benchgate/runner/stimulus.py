"""The generator-driven step kinds (``tone``, ``sweep``, ``level_sweep``), registered with the
executor (:data:`benchgate.runner.execute.STEP_RUNNERS`).

Each point: set the generator (sine, frequency, level, offset), switch its output on, let the
response settle on the run's clock, record the unit's input and output together on a
two-channel recorder, keep both captures, measure. The generator's output is switched off when
the step ends, whatever happened (the session's safe state switches it off too).
"""

from __future__ import annotations

from collections.abc import Callable
from typing import Any

from benchgate.analysis.measurement import Measurement
from benchgate.analysis.registry import (
    FREQUENCY_SWEEP_MEASUREMENTS,
    LEVEL_SWEEP_MEASUREMENTS,
    RESPONSE_MEASUREMENTS,
    measure_response,
)
from benchgate.analysis.response import (
    ResponseContext,
    Stimulated,
    gain_db,
    input_amplitude,
    output_amplitude,
    output_thd,
    phase,
)
from benchgate.analysis.sweep import FrequencySweep, ResponsePoint
from benchgate.analysis.transfer import LevelPoint, LevelSweep
from benchgate.errors import InstrumentError
from benchgate.instruments.base import Generator, MultiRecorder
from benchgate.plan.limits import Window
from benchgate.plan.stimulus import sweep_frequencies
from benchgate.record import CaptureRecord, StepRecord
from benchgate.runner.acquire import CaptureProgress
from benchgate.runner.execute import Executor, register_step
from benchgate.units.format import format_quantity


def _generator(ex: Executor) -> Generator:
    inst = ex.require_bench()["generator"]
    if not isinstance(inst, Generator):
        raise InstrumentError("generator", f"the generator is not a signal generator ({type(inst).__name__})")
    return inst


def _recorder(ex: Executor, step: Any) -> MultiRecorder:
    inst = ex.require_bench()[step.instrument]
    if not isinstance(inst, MultiRecorder):
        raise InstrumentError(step.instrument, "this recorder cannot record two channels at the same instants")
    return inst


def _drive(ex: Executor, step: Any, frequency: float, level: float) -> None:
    gen = _generator(ex)
    gen.set_waveform("sine")
    gen.set_frequency(frequency)
    gen.set_amplitude(level, step.level_unit)
    gen.set_offset(step.offset)
    gen.output(True)
    ex.sleep(step.settle, f"settle at {frequency:g} Hz")


def _record(ex: Executor, step: Any, srec: StepRecord, frequency: float, key: str) -> Stimulated:
    duration = step.record_length(frequency)

    # fractions to the progress bar, previews of the first channel (the stimulus) to the face
    progress = CaptureProgress(ex.hooks, f"record {step.input_channel}+{step.output_channel}", duration)
    ref, out = _recorder(ex, step).capture_channels((step.input_channel, step.output_channel), duration=duration,
                                                    rate=step.rate, progress=progress)
    meta = {"stimulus_frequency": frequency}
    ref, out = ref.with_metadata(**meta), out.with_metadata(**meta)
    for cap, suffix in ((ref, "in"), (out, "out")):
        path = ex.layout.capture_path(f"{key}-{suffix}")
        path.parent.mkdir(parents=True, exist_ok=True)
        sha = ex.save_capture(cap, path)
        ex.capture_paths[f"capture:{key}-{suffix}"] = path
        if suffix == "out":  # the record names the output capture of the step's last point
            import os

            srec.capture = CaptureRecord(
                file=os.path.relpath(path, ex.layout.folder), sha256=sha, channel=cap.channel,
                sample_rate=cap.sample_rate, samples=cap.n, instrument=step.instrument, warnings=[],
                metadata=dict(cap.metadata))
    ex.captures[step.id] = out
    return Stimulated(ref, out, frequency)


def _stopped(ex: Executor, work: Callable[[], None]) -> None:
    """Run ``work`` and switch the generator output off afterwards, whatever happened."""
    try:
        work()
    finally:
        _generator(ex).output(False)


def _judge_all(ex: Executor, step: Any, srec: StepRecord, measured: dict[str, Measurement]) -> None:
    for check in step.checks:
        ex._judge(step, srec, check, measured.get(check.measurement))


def run_tone(ex: Executor, step: Any, srec: StepRecord, attempt: int) -> None:
    """One sine; response measurements on both channels, any other on the output alone."""
    key = step.id if attempt == 1 else f"{step.id}-{attempt}"
    names = [c.measurement for c in step.checks]

    def work() -> None:
        _drive(ex, step, step.frequency, step.level)
        rec = _record(ex, step, srec, step.frequency, key)
        measured = measure_response([n for n in names if n in RESPONSE_MEASUREMENTS], rec)
        single = [n for n in names if n not in RESPONSE_MEASUREMENTS]
        if single:
            analysis = ex.analyze(rec.output, single, harmonics=step.harmonics, views=False)
            measured.update(analysis.measurements)
            if srec.capture is not None:
                srec.capture.warnings = list(analysis.warnings)
        _judge_all(ex, step, srec, measured)

    _stopped(ex, work)


def mask_check(point: ResponsePoint, window: Window | None) -> Measurement | None:
    """The gain (dB) at one sweep point, with its frequency and phase in the details, for judging
    against the mask's window there (None where the mask sets no limit)."""
    if window is None:
        return None
    g = point.gain_db
    details = dict(g.details or {})
    details["frequency_hz"] = point.frequency
    if point.phase is not None and point.phase.valid:
        details["phase_deg"], details["phase_u_deg"] = point.phase.value, point.phase.uncertainty
    return Measurement(g.name, g.value, g.unit, g.uncertainty, g.valid, g.reason, details)


def run_sweep(ex: Executor, step: Any, srec: StepRecord, attempt: int) -> None:
    """Every frequency in turn: gain and phase; the mask judged at each point; the sweep's checks."""
    points: list[ResponsePoint] = []

    def work() -> None:
        freqs = sweep_frequencies(step)
        for i, f in enumerate(freqs):
            _drive(ex, step, f, step.level)
            key = f"{step.id}-p{i:02d}" + ("" if attempt == 1 else f"-{attempt}")
            rec = _record(ex, step, srec, f, key)
            ctx = ResponseContext(rec)
            point = ResponsePoint(f, gain_db(rec, context=ctx), phase(rec, context=ctx))
            points.append(point)
            if step.mask is not None:
                window = step.mask.window_at(f)
                m = mask_check(point, window)
                if m is not None and window is not None:
                    _judge_mask(ex, step, srec, m, window)
        _keep_points(srec, "response_points", [_point_row(p) for p in points])
        if step.mask is not None and srec.capture is not None:
            srec.capture.metadata["mask"] = [[c.frequency, c.low, c.high] for c in step.mask.points]
        sweep = FrequencySweep(tuple(points), step.reference_frequency, step.passband)
        _judge_all(ex, step, srec, {c.measurement: FREQUENCY_SWEEP_MEASUREMENTS[c.measurement](sweep)
                                    for c in step.checks})

    _stopped(ex, work)
    srec.notes.append(f"sweep: {len(points)} points from {points[0].frequency:g} Hz to "
                      f"{points[-1].frequency:g} Hz" if points else "sweep: no point measured")


def _ok(m: Measurement | None) -> float | None:
    return m.value if m is not None and m.valid else None


def _point_row(p: ResponsePoint) -> dict[str, Any]:
    return {"frequency": p.frequency, "gain_db": _ok(p.gain_db), "gain_u": p.gain_db.uncertainty,
            "phase": _ok(p.phase), "phase_u": p.phase.uncertainty if p.phase is not None else None}


def _keep_points(srec: StepRecord, key: str, rows: list[dict[str, Any]]) -> None:
    """The sweep's points, for the report's plots, in the metadata of the step's capture record."""
    if srec.capture is not None:
        srec.capture.metadata[key] = rows


def _judge_mask(ex: Executor, step: Any, srec: StepRecord, m: Measurement, window: Window) -> None:
    from benchgate.plan.model import Check

    # one check per frequency ("gain_db at 1 kHz"), so a lot's statistics keep the points apart
    details = m.details or {}
    ex._judge(step, srec, Check(mask_check_name(details["frequency_hz"]), window), m)


def mask_check_name(frequency: float) -> str:
    """The name of the mask check at ``frequency`` (Hz)."""
    return f"gain_db at {format_quantity(frequency, 'Hz')}"


def run_level_sweep(ex: Executor, step: Any, srec: StepRecord, attempt: int) -> None:
    """Rising levels at one frequency: input and output amplitudes and output THD at each."""
    points: list[LevelPoint] = []

    def work() -> None:
        for i, level in enumerate(step.levels):
            _drive(ex, step, step.frequency, level)
            key = f"{step.id}-l{i:02d}" + ("" if attempt == 1 else f"-{attempt}")
            rec = _record(ex, step, srec, step.frequency, key)
            ctx = ResponseContext(rec, harmonics=10)
            points.append(LevelPoint(input_amplitude(rec, context=ctx), output_amplitude(rec, context=ctx),
                                     output_thd(rec, context=ctx)))
        _keep_points(srec, "transfer_points", [
            {"input": _ok(p.input_amplitude), "output": _ok(p.output_amplitude), "thd": _ok(p.thd)}
            for p in points])
        sweep = LevelSweep(tuple(points), step.output_level, step.thd_limit)
        _judge_all(ex, step, srec, {c.measurement: LEVEL_SWEEP_MEASUREMENTS[c.measurement](sweep)
                                    for c in step.checks})

    _stopped(ex, work)
    srec.notes.append("levels: " + "; ".join(
        f"in {p.input_amplitude.value:.4g} V → out {p.output_amplitude.value:.4g} V, THD {p.thd.value:.3g} %"
        for p in points if p.input_amplitude.valid and p.output_amplitude.valid and p.thd.valid))


register_step("tone", run_tone)
register_step("sweep", run_sweep)
register_step("level_sweep", run_level_sweep)
