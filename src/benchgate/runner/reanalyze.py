"""Re-judge a stored run against another plan version, without hardware.

The captures named in a unit's JSON report are read back (their SHA-256 checked against the
report), analyzed again, and judged against the new plan's windows and decision rule; stored
single readings are re-judged as they were measured. Steps with nothing to re-judge (supply,
wait, prompt) keep their recorded outcome. The new report says it is a reanalysis, and of what
(``reanalysis_of``: the original report, run id, plan id, version and hash).
"""

from __future__ import annotations

import shutil
import uuid
from collections.abc import Callable, Mapping
from functools import partial
from pathlib import Path
from typing import Any

from benchgate import __version__
from benchgate.analysis.measurement import Measurement
from benchgate.common.evidence import file_sha256, utc_now
from benchgate.judge.rules import judge
from benchgate.record import CaptureRecord, CheckRecord, StepRecord, UnitRecord
from benchgate.runner.execute import step_status
from benchgate.runner.options import RunOutcome, exit_code_for


def _judge_all(step: Any, srec: StepRecord, plan: Any, measurements: Mapping[str, Measurement | None]) -> None:
    for check in step.checks:
        m = measurements.get(check.measurement)
        cv = judge(m, check.window, plan.decision, getattr(plan, "max_risk", None))
        srec.checks.append(CheckRecord(step.id, check.measurement, check.window, m, cv.verdict,
                                       cv.reason, cv.rule, None if cv.risk is None else cv.risk.probability))


def _invalid_all(step: Any, reason: str) -> dict[str, Measurement]:
    return {c.measurement: Measurement.invalid(c.measurement, c.window.unit, reason) for c in step.checks}


def reanalyze(report: str | Path, plan: Any, *, reports_dir: str | Path | None = None,
              read_report: Callable[..., UnitRecord] | None = None, load_capture: Callable[..., Any] | None = None,
              analyze: Callable[..., Any] | None = None, write_reports: Callable[..., dict[str, Path]] | None = None,
              layout_factory: Callable[..., Any] | None = None) -> RunOutcome:
    """Re-judge the run stored in ``report`` (a unit JSON report) against ``plan``.

    The new report goes to ``reports_dir`` (default: the reports root the original lives in),
    under the new plan's id; captures are copied beside it when that is another folder.
    """
    if read_report is None:
        from benchgate.report.json_report import read_json

        read_report = read_json
    if load_capture is None:
        from benchgate.capfile import load_capture as load

        load_capture = load
    if analyze is None:
        from benchgate.analysis import analyze as analyse_once

        analyze = partial(analyse_once, views=True)  # the report draws this analysis's views
    if write_reports is None:
        from benchgate.report import write_reports as write

        write_reports = write
    if layout_factory is None:
        from benchgate.report.layout import ReportLayout

        layout_factory = ReportLayout

    report = Path(report)
    old = read_report(report)
    folder = report.parent
    root = Path(reports_dir) if reports_dir is not None else folder.parent.parent
    new = UnitRecord(
        run_id=uuid.uuid4().hex, serial=old.serial, plan_id=plan.id, plan_version=str(plan.version),
        plan_hash=plan.hash, plan_path=str(plan.path), product=plan.product, station_id=old.station_id,
        operator=old.operator, lot=old.lot, started=utc_now(), software_version=__version__,
        decision_rule=plan.decision, instruments=list(old.instruments), cautions=list(plan.cautions),
        hazards=[f"{h.name}: {h.text}" for h in plan.hazards], hazards_acknowledged=old.hazards_acknowledged,
        flags={**old.flags, "reanalysis": True},
        reanalysis_of={"report": str(report), "run_id": old.run_id, "plan_id": old.plan_id,
                       "plan_version": old.plan_version, "plan_hash": old.plan_hash,
                       "started": old.started, "verdict": old.verdict.value})
    layout = layout_factory(root, plan.id, old.serial, new.started)
    Path(layout.folder).mkdir(parents=True, exist_ok=True)
    stored = {s.id: s for s in old.steps}
    captures: dict[str, Any] = {}
    for step in plan.steps:
        srec = StepRecord(id=step.id, kind=step.kind, title=step.title)
        new.steps.append(srec)
        was = stored.get(step.id)
        if was is None:
            srec.status = "skipped" if not getattr(step, "checks", ()) else "error"
            srec.error = None if srec.status == "skipped" else "the original run has no such step"
            if srec.status == "error":
                _judge_all(step, srec, plan, _invalid_all(step, f"step {step.id} is not in the original run"))
            continue
        srec.started, srec.ended, srec.attempts = was.started, was.ended, was.attempts
        srec.answer, srec.notes = was.answer, list(was.notes) + ["reanalysis: re-judged from the stored data"]
        if step.kind == "capture":
            _recapture(step, srec, was, plan, folder, Path(layout.folder), captures, load_capture, analyze)
        elif step.kind == "reading":
            old_values = {c.measurement: c.result for c in was.checks}
            if was.status in ("skipped", "aborted") or not old_values:
                srec.status, srec.error = was.status, was.error
                _judge_all(step, srec, plan, _invalid_all(step, f"no stored reading ({was.status})"))
            else:
                _judge_all(step, srec, plan, old_values)
        else:
            srec.status, srec.error = was.status, was.error
            continue
        if was.status in ("skipped", "aborted"):
            srec.status = was.status
        else:
            srec.status = step_status(srec)
            if srec.status == "done" and was.status == "error":
                srec.status = "error"  # a partial record cannot be made whole by re-judging
    from benchgate.runner.session import unit_verdict

    new.verdict, new.reason = unit_verdict(new, None)
    new.reason = f"reanalysis: {new.reason}"
    new.ended = utc_now()
    paths = dict(write_reports(new, layout, captures))
    return RunOutcome(record=new, paths=paths, exit_code=exit_code_for(new.verdict))


def _recapture(step: Any, srec: StepRecord, was: StepRecord, plan: Any, folder: Path, new_folder: Path,
               captures: dict[str, Any], load_capture: Callable[..., Any], analyze: Callable[..., Any]) -> None:
    if was.capture is None:
        srec.status, srec.error = was.status, was.error
        _judge_all(step, srec, plan, _invalid_all(step, "the original run kept no capture for this step"))
        return
    source = folder / was.capture.file
    if not source.exists():
        _judge_all(step, srec, plan, _invalid_all(step, f"stored capture {was.capture.file} is missing"))
        return
    digest = file_sha256(source)  # the stored file must be the one the original run judged
    if digest != was.capture.sha256:
        _judge_all(step, srec, plan, _invalid_all(
            step, f"stored capture {was.capture.file} does not match its SHA-256 in the report"))
        return
    target = new_folder / Path(was.capture.file).name
    if target.resolve() != source.resolve():
        shutil.copy2(source, target)
    # a byte-for-byte copy (or the file itself): its digest is the one just checked
    capture = load_capture(target)
    srec.capture = CaptureRecord(file=target.name, sha256=digest, channel=was.capture.channel,
                                 sample_rate=was.capture.sample_rate, samples=was.capture.samples,
                                 instrument=was.capture.instrument,
                                 metadata={k: v for k, v in dict(getattr(capture, "metadata", {})).items()
                                           if k not in ("file", "format")} or dict(was.capture.metadata))
    captures[step.id] = capture
    try:
        analysis = analyze(capture, [c.measurement for c in step.checks], harmonics=step.harmonics)
        srec.capture.views = getattr(analysis, "views", None)
        srec.capture.warnings = list(analysis.warnings)
        measurements = dict(analysis.measurements)
    except Exception as exc:  # any analysis failure makes the checks error, never pass
        measurements = _invalid_all(step, f"analysis failed: {exc}")
    if was.capture.samples and was.status == "error":
        srec.notes.append("the stored capture is partial (the original step ended in error)")
        srec.error = was.error
    _judge_all(step, srec, plan, measurements)
