"""Hand-made run records: for benchmarks of the store, and for tests that need runs without a bench.

Test and benchmark data, not part of the product: tests import it as ``synthetic_runs`` (this
folder is on ``sys.path`` under pytest), ``bench/`` scripts put this folder on ``sys.path``.

:func:`make_record` builds a finished :class:`~benchgate.record.UnitRecord` from a short list
of checks; :func:`synthetic_lot` draws a lot of invented units (values from normal
distributions, a few retests) for the summary benchmark. Nothing here touches instruments.
"""

from __future__ import annotations

import uuid
from collections.abc import Iterator, Sequence
from dataclasses import dataclass
from datetime import UTC, datetime, timedelta

from benchgate.analysis.measurement import Measurement
from benchgate.judge.rules import Verdict, combine, judge
from benchgate.plan.limits import Window
from benchgate.record import CheckRecord, StepRecord, UnitRecord

EPOCH = datetime(2026, 11, 2, 8, 0, tzinfo=UTC)


@dataclass(frozen=True)
class CheckSpec:
    """One check to put in a record. ``verdict=None`` judges the value with the simple rule."""

    step: str
    measurement: str
    value: float | None
    unit: str
    low: float | None = None
    high: float | None = None
    uncertainty: float | None = None
    verdict: Verdict | None = None
    reason: str | None = None


def iso(t: datetime) -> str:
    return t.astimezone(UTC).isoformat(timespec="milliseconds").replace("+00:00", "Z")


def make_record(serial: str, checks: Sequence[CheckSpec] = (), *, plan_id: str = "tb3",
                started: datetime | str = EPOCH, lot: str | None = "L1",
                verdict: Verdict | None = None, reason: str | None = None,
                finished: bool = True, flags: dict | None = None,
                operator: str | None = "synthetic", run_id: str | None = None,
                cut: str | None = None) -> UnitRecord:
    """A record with one step per distinct step id in ``checks``; the unit verdict is combined
    from the checks unless ``verdict`` is given.

    ``cut`` ends the run the way the runner's executor records a run stopped early: a last step
    ``power-on`` with status ``aborted`` (``cut="aborted"``: Ctrl-C or a signal; unit verdict
    aborted unless a check failed) or status ``error`` with its own error text
    (``cut="station error"``: an instrument lost mid-step; unit verdict error unless a check
    failed)."""
    t0 = datetime.fromisoformat(started.replace("Z", "+00:00")) if isinstance(started, str) else started
    steps: dict[str, StepRecord] = {}
    for spec in checks:
        step = steps.setdefault(spec.step, StepRecord(id=spec.step, kind="capture", title=spec.step,
                                                      status="done", attempts=1))
        window = Window(unit=spec.unit, low=spec.low, high=spec.high)
        if spec.value is None:
            m = Measurement.invalid(spec.measurement, spec.unit, spec.reason or "no signal")
        else:
            m = Measurement(spec.measurement, spec.value, spec.unit, spec.uncertainty)
        judged = judge(m, window, "simple")
        v = spec.verdict or judged.verdict
        step.checks.append(CheckRecord(step_id=spec.step, measurement=spec.measurement,
                                       window=window, result=m, verdict=v,
                                       reason=spec.reason or judged.reason, rule="simple"))
    all_checks = [c for s in steps.values() for c in s.checks]
    found = [c.verdict for c in all_checks]
    if cut is not None:
        status, text, v = {"aborted": ("aborted", "interrupted by the operator (Ctrl-C)", Verdict.ABORTED),
                           "station error": ("error", "psu: no answer within 2 s", Verdict.ERROR)}[cut]
        steps["power-on"] = StepRecord(id="power-on", kind="supply", title="power-on",
                                       status=status, attempts=1, error=text)
        found.append(v)
        reason = reason or text
    unit_verdict = verdict or combine(found)
    if reason is None:
        bad = [c.reason for c in all_checks if c.verdict is not Verdict.PASS]
        reason = bad[0] if bad else "all checks passed"
    rec = UnitRecord(
        run_id=run_id or uuid.uuid4().hex, serial=serial, plan_id=plan_id, plan_version="1",
        plan_hash="0" * 16, plan_path=f"testplans/{plan_id}.yaml", product=plan_id.upper(),
        station_id="owl-bench-1", operator=operator, lot=lot, started=iso(t0),
        software_version="0", decision_rule="simple", steps=list(steps.values()),
        flags=dict(flags or {}))
    if finished:
        rec.ended = iso(t0 + timedelta(seconds=3))
        rec.verdict = unit_verdict
        rec.reason = reason
    return rec


#: the invented TB-3 lot: (step, measurement, unit, low, high, mean, sigma)
TB3_CHECKS = (
    ("supply-on", "supply_current", "A", 2e-3, 8e-3, 4.1e-3, 0.4e-3),
    ("capture-tone", "frequency", "Hz", 860.0, 1050.0, 955.0, 18.0),
    ("capture-tone", "amplitude", "V", 0.6, 1.4, 1.0, 0.08),
    ("capture-tone", "thd", "%", None, 5.0, 2.2, 0.6),
    ("capture-tone", "startup_time", "s", None, 0.1, 0.045, 0.012),
)


def synthetic_lot(units: int, *, seed: int = 1, retest_fraction: float = 0.05,
                  defect_fraction: float = 0.03, lot: str = "L1") -> Iterator[UnitRecord]:
    """Records for ``units`` invented TB-3 units.

    A fraction ``retest_fraction`` of the units is tested twice; in a fraction
    ``defect_fraction`` of the runs one check lands outside its window, and in a tenth of
    those the measurement is not valid instead (an error).
    """
    import numpy as np

    rng = np.random.default_rng(seed)
    t = EPOCH
    for i in range(units):
        serial = f"TB3-{i:06d}"
        attempts = 2 if rng.random() < retest_fraction else 1
        for _ in range(attempts):
            specs = [CheckSpec(step, meas, float(rng.normal(mu, sd)), unit, low, high, sd / 10)
                     for step, meas, unit, low, high, mu, sd in TB3_CHECKS]
            if rng.random() < defect_fraction:
                k = int(rng.integers(len(specs)))
                bad = specs[k]
                if rng.random() < 0.1:
                    specs[k] = CheckSpec(bad.step, bad.measurement, None, bad.unit, bad.low,
                                         bad.high, reason="no steady tone found")
                else:
                    edge = bad.high if bad.low is None or rng.random() < 0.5 else bad.low
                    over = 1.0 + (0.1 if edge == bad.high else -0.1)
                    specs[k] = CheckSpec(bad.step, bad.measurement, edge * over, bad.unit,
                                         bad.low, bad.high, bad.uncertainty)
            yield make_record(serial, specs, started=t, lot=lot)
            t += timedelta(seconds=20)
