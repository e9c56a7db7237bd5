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


def history(db_path: Path, reports_dir: Path, serial: str, skip_run: str | None = None) -> list[dict]:
    """The unit's earlier runs, newest first (empty when there is no database yet)."""
    if not Path(db_path).is_file():
        return []
    from benchgate.store import ResultsDB

    with ResultsDB.open(db_path, create=False) as db:
        runs = [r for r in db.history(serial) if r.run_id != skip_run][:HISTORY_ROWS]
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
