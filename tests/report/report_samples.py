"""Hand-built unit records and synthetic captures for the report tests (invented demo data).

The capture is a ~955 Hz sine with a start-up envelope, 2nd and 3rd harmonics and a little
noise, on the 1.65 V mid-rail of a 12-bit 3.3 V converter — the TB-3 tone board's test point.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

from benchgate.analysis.capture import AdcInfo, Capture
from benchgate.analysis.measurement import Measurement
from benchgate.capfile import save_capture
from benchgate.judge.rules import combine, judge
from benchgate.plan.limits import Window
from benchgate.record import CaptureRecord, CheckRecord, InstrumentRecord, StepRecord, UnitRecord

RATE = 50_000.0
F0 = 955.0
STARTUP = 0.030  # s: oscillation begins here (invented)
HOSTILE_SERIAL = "<script>alert('x')</script> \"TB3\" & ../../x"


def tone_capture(seconds: float = 0.25, f0: float = F0, amplitude: float = 1.0, seed: int = 1) -> Capture:
    rng = np.random.default_rng(seed)
    t = np.arange(int(seconds * RATE)) / RATE
    grow = np.clip((t - STARTUP) / 0.012, 0.0, None)
    env = np.where(t < STARTUP, 0.0, 1.0 - np.exp(-grow))
    phase = 2 * np.pi * f0 * t
    v = amplitude * env * (np.sin(phase) + 0.03 * np.sin(2 * phase + 0.4) + 0.012 * np.sin(3 * phase + 1.1))
    v = 1.65 + v + rng.normal(0.0, 0.002, t.size)
    adc = AdcInfo(12, 3.3)
    v = np.round(np.clip(v, 0, adc.high_rail) / adc.lsb) * adc.lsb  # 12-bit quantiser
    return Capture(v, RATE, channel="out", adc=adc, clock_ppm=50.0, metadata={"source": "synthetic"})


def save_npz(capture: Capture, path: Path) -> str:
    """Save as the runner does (``benchgate.capfile.save_capture``); returns the file's SHA-256."""
    return save_capture(capture, path)


def _check(step: str, m: Measurement, window: Window, rule: str = "simple") -> CheckRecord:
    v = judge(m, window, rule)
    return CheckRecord(step, m.name, window, m, v.verdict, v.reason, v.rule)


def make_record(serial: str = "TB3-0007", *, fail: bool = False, capture_file: str = "cap.npz",
                sha256: str = "0" * 64, rule: str = "simple", reanalysis: bool = False) -> UnitRecord:
    """A complete TB-3 run: supply on, capture with four checks, a current reading, a prompt."""
    freq = 1182.0 if fail else 951.2
    tone = [
        _check("capture-tone", Measurement("frequency", freq, "Hz", 0.4, details={"fit": "4-parameter"}),
               Window("Hz", 880.0, 1030.0, 955.0, "rc_ladder highpass 3 sections: worst case",
                      details={"corners": 64, "gain_needed": 29.0}), rule),
        _check("capture-tone", Measurement("amplitude", 0.998, "V", 0.012), Window("V", 0.6, 1.4, 1.0), rule),
        _check("capture-tone", Measurement("thd", 3.2, "%", 0.2), Window("%", high=5.0), rule),
        _check("capture-tone", Measurement("startup_time", STARTUP + 0.008, "s", 0.001),
               Window("s", high=0.1), rule),
    ]
    current = [_check("supply-current", Measurement("supply_current", 0.0041, "A", 0.00005),
                      Window("A", 0.002, 0.008, 0.004), rule)]
    steps = [
        StepRecord("power", "supply", "Set 9 V, 50 mA limit", "done", "2026-12-01T10:00:00Z",
                   "2026-12-01T10:00:00.2Z", 1),
        StepRecord("capture-tone", "capture", "Capture the tone <out>", "failed" if fail else "done",
                   "2026-12-01T10:00:00.2Z", "2026-12-01T10:00:00.6Z", 2, tone,
                   CaptureRecord(capture_file, sha256, "out", RATE, 12500, "adc", ["2 samples lost"]),
                   notes=["retry 1: operator re-seated the board <clip> & probe"]),
        StepRecord("supply-current", "reading", "Supply current", "done", "2026-12-01T10:00:00.6Z",
                   "2026-12-01T10:00:00.8Z", 1, current),
        StepRecord("look", "prompt", "Is the LED lit?", "done", "2026-12-01T10:00:00.8Z",
                   "2026-12-01T10:00:01Z", 1, answer="yes <b>bold</b>"),
    ]
    checks = tone + current
    verdict = combine(c.verdict for c in checks)
    worst = next((c for c in checks if c.verdict == verdict), checks[0])
    return UnitRecord(
        run_id="run-0007", serial=serial, plan_id="tb3", plan_version="3", plan_hash="c0ffee12" * 8,
        plan_path="testplans/tb3.yaml", product="TB-3 tone board", station_id="owl-bench-1",
        operator="Wren <o'neil>", lot="L-2026-12", started="2026-12-01T10:00:00Z",
        software_version="0.1.0", decision_rule=rule, ended="2026-12-01T10:00:01Z",
        verdict=verdict, reason=worst.reason, steps=steps,
        instruments=[
            InstrumentRecord("adc", "/dev/pts/5", "OWL,ADC-12,0001,1.0",
                             {"date": "2026-06-01", "due": "2027-06-01", "status": "valid"}),
            InstrumentRecord("supply", "TCPIP0::127.0.0.1::5025::SOCKET", "OWL,PSU-30,7,2.1",
                             {"date": "2025-01-01", "due": "2025-12-01", "status": "expired"}),
        ],
        cautions=["Low voltage only: 9 V board supply", "Fixture clip <J3> must be closed"],
        hazards=["hot-surface: the regulator can reach 60 °C"],
        hazards_acknowledged="typed by operator",
        flags={"allow_expired_calibration": True, "unattended": False},
        reanalysis_of=({"report": "reports/tb3/TB3-0007/20261130T090000.000Z-fail.json",
                        "run_id": "run-0001", "plan_hash": "abad1dea" * 8} if reanalysis else None),
    )
