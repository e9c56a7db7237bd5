"""Speed: the full measurement set on a 10⁶-sample capture ÷ one numpy.fft.rfft of it, in CPU
time measured in one run (so a busy machine slows both alike), in-process and through
``benchgate analyze FILE --json`` (file load, analysis and JSON; the command's main() called
in-process, so interpreter start-up and imports are not counted), and the wall time of
``benchgate --help``.

Targets (issue 14): the full measurement set ≤ 5× one rfft, in-process and through
``benchgate analyze`` (file load and JSON included); `benchgate --help` ≤ 0.3 s.
The file is an uncompressed .npz (numpy.savez); the compressed .npz that ``save_capture``
writes is timed too (its zlib inflate alone costs about two transforms).
Per look of an adaptive capture (issue 14): a capture re-measured after every block, each look
analysed afresh and with the growing capture's kept sums (``analyze(..., growing=GrowingFit())``,
benchgate.analysis._growing); CPU time summed over the looks, ratio fresh ÷ kept. Only the tone's
four-parameter fit reuses earlier looks; the rest of the analysis is made afresh at every look.
Run: python bench/bench_speed.py
"""

from __future__ import annotations

import contextlib
import io
import json
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

from benchgate.analysis import AdcInfo, Capture, analyze
from benchgate.analysis._growing import GrowingFit
from benchgate.capfile import save_capture
from benchgate.cli import main as cli_main


def best(func, repeat: int, clock=time.process_time) -> float:
    times = []
    for _ in range(repeat):
        t0 = clock()
        func()
        times.append(clock() - t0)
    return min(times)


def long_capture(n: int = 1_000_000) -> Capture:
    fs = 50_000.0
    t = np.arange(n) / fs
    rng = np.random.default_rng(1)
    adc = AdcInfo(12, 3.3)
    ph = 2 * np.pi * 955.3 * t
    x = 1.65 + np.sin(ph) - 0.02 * np.sin(3 * ph) + rng.normal(0, 0.002, n)
    return Capture(np.round(x / adc.lsb) * adc.lsb, fs, adc=adc, clock_ppm=50)


def write_plain_npz(cap: Capture, path: Path) -> None:
    meta = json.dumps({"adc": cap.adc.to_dict(), "clock_ppm": cap.clock_ppm})
    np.savez(path, samples=cap.samples, sample_rate=np.float64(cap.sample_rate), meta=np.array(meta))


def through_cli(path: Path) -> None:
    with contextlib.redirect_stdout(io.StringIO()):
        if cli_main(["analyze", str(path), "--json"]) != 0:
            raise SystemExit(f"benchgate analyze {path} failed")


def per_look(cap: Capture, looks: int, names: tuple[str, ...] | None) -> tuple[float, float, float]:
    """CPU seconds summed over ``looks`` growing looks of ``cap``: afresh, with kept sums, and
    the four-parameter fit's own share of the fresh figure."""
    from benchgate.analysis import sinefit

    fresh = kept = fit = 0.0
    growing = GrowingFit()
    step = cap.n // looks
    for k in range(1, looks + 1):
        look = Capture(cap.samples[:k * step], cap.sample_rate, adc=cap.adc, clock_ppm=cap.clock_ppm)
        analyze(look, names)  # untimed: the taper of this length is cached for both timed calls
        t0 = time.process_time()
        analyze(look, names, growing=growing)
        t1 = time.process_time()
        analyze(look, names)
        t2 = time.process_time()
        kept += t1 - t0
        fresh += t2 - t1
        w0 = 2 * np.pi * 955.3 / cap.sample_rate
        fit += best(lambda look=look, w0=w0: sinefit.fit4(look.samples, w0), 1)
    return fresh, kept, fit


def main() -> None:
    cap = long_capture()
    x = cap.samples
    with tempfile.TemporaryDirectory() as tmp:
        plain, packed = Path(tmp) / "capture.npz", Path(tmp) / "capture-compressed.npz"
        write_plain_npz(cap, plain)
        save_capture(cap, packed)
        analyze(cap)  # warm-up
        through_cli(plain)
        np.fft.rfft(x)
        rows: dict[str, list[float]] = {"fft": [], "in-process": [], "cli": [], "cli-compressed": []}
        for _ in range(5):  # interleave, so a busy machine slows every figure alike
            rows["fft"].append(best(lambda: np.fft.rfft(x), 5))
            rows["in-process"].append(best(lambda: analyze(cap), 3))
            rows["cli"].append(best(lambda: through_cli(plain), 3))
            rows["cli-compressed"].append(best(lambda: through_cli(packed), 2))
    fft = np.array(rows["fft"])

    def line(label: str, key: str) -> str:
        r = np.array(rows[key]) / fft
        return (f"{label}: {np.median(rows[key]) * 1e3:.0f} ms CPU, ratio {np.median(r):.1f}× one rfft "
                f"(runs: {', '.join(f'{v:.1f}' for v in sorted(r))})")

    print(f"1e6 samples, one rfft {np.median(fft) * 1e3:.1f} ms CPU; target ≤ 5× for the first two")
    print(line("  full measurement set in-process", "in-process"))
    print(line("  benchgate analyze FILE.npz --json (load + analysis + JSON)", "cli"))
    print(line("  same, compressed .npz as save_capture writes it", "cli-compressed"))
    for label, n, names in (("10 looks of a 1e6-sample capture, full measurement set", 1_000_000, None),
                            ("10 looks of a 1e6-sample capture, frequency + amplitude + thd", 1_000_000,
                             ("frequency", "amplitude", "thd")),
                            ("10 looks of a 25 000-sample capture (TB-3 adaptive step), frequency + "
                             "amplitude + thd", 25_000, ("frequency", "amplitude", "thd"))):
        looked = long_capture(n)
        runs = [per_look(looked, 10, names) for _ in range(3)]
        fresh, kept, fit = (float(np.median([r[i] for r in runs])) for i in range(3))
        print(f"per look, {label}: afresh {fresh / 10 * 1e3:.1f} ms, with kept sums {kept / 10 * 1e3:.1f} ms "
              f"CPU -> ratio {fresh / kept:.2f}× (the fit from scratch is {fit / 10 * 1e3:.1f} ms of a look)")
    cmd = [sys.executable, "-m", "benchgate", "--help"]
    base = [sys.executable, "-c", "pass"]
    t_help = best(lambda: subprocess.run(cmd, capture_output=True, check=True), 5, time.perf_counter)
    t_py = best(lambda: subprocess.run(base, capture_output=True, check=True), 5, time.perf_counter)
    print(f"benchgate --help: {t_help * 1e3:.0f} ms wall (bare python start-up {t_py * 1e3:.0f} ms; target ≤ 300 ms)")


if __name__ == "__main__":
    main()
