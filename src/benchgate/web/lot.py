"""What the page shows around the unit: the session's lot tally, the unit's earlier runs, the
capture as a picture, and the station's instruments.

Earlier runs come from the results database through the store's public functions, read only.
"""

from __future__ import annotations

import datetime as _dt
from collections import Counter
from pathlib import Path
from typing import Any
from urllib.parse import quote

import numpy as np

#: columns of the waveform picture (each a min/max pair)
WAVE_COLUMNS = 800
#: samples of the detail trace (a few periods of an audio-range tone at typical rates)
DETAIL_SAMPLES = 400
#: earlier runs listed for a unit
HISTORY_ROWS = 8


class Tally:
    """The running tally of one page session: units, passes, first-pass yield, top failure.

    First-pass yield = units whose first run in this session passed / units tested; every run
    counts as an attempt, aborted ones included (common practice, no published source).
    """

    def __init__(self) -> None:
        self.units: dict[str, list[str]] = {}
        self.failures: Counter[str] = Counter()

    def add(self, record: Any) -> None:
        verdict = record.verdict.value
        self.units.setdefault(record.serial, []).append(verdict)
        if verdict == "pass":
            return
        labels = [f"{c.step_id} · {c.measurement}" for c in record.checks() if c.verdict.value == "fail"]
        if not labels:
            labels = [verdict if verdict == "aborted" else (record.reason or verdict)[:80]]
        for label in dict.fromkeys(labels):
            self.failures[label] += 1

    def to_dict(self) -> dict[str, Any]:
        tested = len(self.units)
        top = self.failures.most_common(1)
        return {
            "tested": tested,
            "passed": sum(1 for v in self.units.values() if v[-1] == "pass"),
            "fpy": None if not tested else sum(1 for v in self.units.values() if v[0] == "pass") / tested,
            "runs": sum(len(v) for v in self.units.values()),
            "top_failure": None if not top else {"label": top[0][0], "count": top[0][1]},
        }


def report_url(reports_dir: Path, path: str | Path | None) -> str | None:
    """The page's address of a report file inside the report folder (None when outside it)."""
    if path is None:
        return None
    try:
        rel = Path(path).resolve().relative_to(Path(reports_dir).resolve())
    except (ValueError, OSError):
        return None
    return "/reports/" + quote(rel.as_posix())


def history(db: str | Path | None, reports_dir: Path, serial: str, skip_run: str | None = None,
            station: str | None = None) -> list[dict]:
    """The unit's earlier runs, newest first, from the results database the runs go to (the one
    setting: ``db``, else ``BENCHGATE_DB``, else the station file's ``results``, else
    ``<reports>/results.sqlite``); none yet: empty."""
    from benchgate.store import open_results
    from benchgate.store.setting import resolve

    default = Path(reports_dir) / "results.sqlite"
    setting = resolve(db, local_default=default, station=station)
    if setting.central is None and not setting.local.is_file():
        return []  # no run yet
    database = open_results(db, local_default=default, role="reader", station=station)
    try:
        runs = [r for r in database.history(serial) if r.run_id != skip_run][:HISTORY_ROWS]
    finally:
        database.close()
    out = []
    for r in runs:
        html = None if r.report_path is None else Path(r.report_path).with_suffix(".html")
        out.append({"started": r.started, "status": r.status, "reason": r.reason, "plan": r.plan_id,
                    "report": report_url(reports_dir, html) if html is not None and html.is_file() else None})
    return out


def wave_picture(capture: Any, step: str | None) -> dict[str, Any]:
    """A capture as min/max columns for drawing (the page never gets the raw samples)."""
    x = np.asarray(capture.samples, dtype=float).ravel()
    n = int(x.size)
    rate = float(capture.sample_rate)
    if n == 0:
        return {"step": step, "channel": capture.channel, "n": 0, "rate": rate, "lo": [], "hi": []}
    cols = min(WAVE_COLUMNS, n)
    edges = np.linspace(0, n, cols + 1).astype(int)[:-1]
    finite = np.where(np.isfinite(x), x, np.nan)
    lo = np.fmin.reduceat(finite, edges)
    hi = np.fmax.reduceat(finite, edges)

    def clean(a: np.ndarray) -> list[float | None]:
        return [None if not np.isfinite(v) else float(f"{v:.5g}") for v in a]

    lo_c, hi_c = clean(lo), clean(hi)
    good = [v for v in lo_c + hi_c if v is not None]
    start = max(0, n - DETAIL_SAMPLES) // 2 if n > DETAIL_SAMPLES else 0
    detail = finite[start:start + DETAIL_SAMPLES]
    return {"step": step, "channel": capture.channel, "n": n, "rate": rate, "duration": n / rate,
            "lo": lo_c, "hi": hi_c, "vmin": min(good) if good else 0.0, "vmax": max(good) if good else 0.0,
            "detail": clean(detail), "detail_start": start / rate}


def instruments(station: Any, identities: dict[str, str | None], today: _dt.date) -> list[dict]:
    """The station's instruments as the page lists them, with calibration state."""
    out = []
    for role, cfg in station.instruments.items():
        cal = cfg.calibration
        if cal is None:
            status, text = "none", "no calibration on record"
        else:
            status = cal.status(today)
            due = cal.to_dict(today).get("due")
            text = {"expired": f"calibration EXPIRED (was due {due})",
                    "valid": f"calibrated, due {due}"}.get(status, "calibration has no due date")
        out.append({"role": role, "kind": cfg.kind, "address": str(cfg.address),
                    "identity": identities.get(role), "calibration": text, "cal_status": status})
    return out


def plan_view(plans: list[tuple[Path, Any, str | None]], index: int, station: Any,
              allow_expired: bool) -> tuple[dict | None, list[dict], str | None]:
    """The chosen plan as the page shows it, the plans to pick from, and why testing is blocked
    (a plan that did not load, an instrument past its calibration due date) or None."""
    from benchgate.runner.preflight import expired_calibrations, roles_used

    path, plan, error = plans[index]
    listing = [{"name": p.name, "label": f"{pl.id} v{pl.version}" if pl else p.name, "error": err}
               for p, pl, err in plans]
    if plan is None:
        return None, listing, f"plan {path.name}: {error}"
    info = {"id": plan.id, "version": str(plan.version), "product": plan.product, "file": path.name,
            "cautions": list(plan.cautions), "decision": plan.decision,
            "hazards": [{"name": h.name, "text": h.text} for h in plan.hazards],
            "steps": [{"id": s.id, "title": s.title, "kind": s.kind} for s in plan.steps]}
    expired = expired_calibrations(station, roles_used(plan), _dt.datetime.now(_dt.UTC).date())
    blocked = None
    if expired and not allow_expired:
        blocked = ("; ".join(expired) + ". Testing is blocked until the instrument is calibrated "
                   "(or the page is started with --allow-expired-calibration, which every report records).")
    return info, listing, blocked


def outcome_view(outcome: Any, reports_dir: Path) -> dict[str, Any]:
    """A finished unit as the page shows it: verdict, reason, each check or step that did not
    pass with its reason, the report's address, and what the safe-state sequence noted."""
    rec = outcome.record
    failed = [{"step": ch.step_id, "measurement": ch.measurement, "verdict": ch.verdict.value,
               "reason": ch.reason} for ch in rec.checks() if ch.verdict.value != "pass"]
    failed += [{"step": s.id, "measurement": "", "verdict": s.status, "reason": s.error}
               for s in rec.steps if s.error and not any(f["step"] == s.id for f in failed)]
    return {"verdict": rec.verdict.value, "reason": rec.reason, "serial": rec.serial,
            "exit_code": outcome.exit_code, "stopped": rec.flags.get("stopped"),
            "report": report_url(reports_dir, outcome.paths.get("html")),
            "report_json": report_url(reports_dir, outcome.paths.get("json")),
            "failed": failed, "safe_state": list(rec.flags.get("safe_state", []))}
