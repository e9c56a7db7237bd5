"""Speed: the full measurement set on a 10⁶-sample capture ÷ one numpy.fft.rfft of it (same
run, best of several), and the wall time of `benchgate --help`.

Targets (issue 2): ≤ 10× one rfft (goal 5×); `benchgate --help` ≤ 0.3 s.
Run: python bench/bench_speed.py
"""

from __future__ import annotations

import subprocess
import sys
import time

import numpy as np

from benchgate.analysis import AdcInfo, Capture, analyze


def best(func, repeat: int) -> float:
    times = []
    for _ in range(repeat):
        t0 = time.perf_counter()
        func()
        times.append(time.perf_counter() - t0)
    return min(times)


def long_capture(n: int = 1_000_000) -> Capture:
    fs = 50_000.0
    t = np.arange(n) / fs
    rng = np.random.default_rng(1)
    adc = AdcInfo(12, 3.3)
    ph = 2 * np.pi * 955.3 * t
    x = 1.65 + np.sin(ph) - 0.02 * np.sin(3 * ph) + rng.normal(0, 0.002, n)
    return Capture(np.round(x / adc.lsb) * adc.lsb, fs, adc=adc, clock_ppm=50)


def main() -> None:
    cap = long_capture()
    x = cap.samples
    analyze(cap)  # warm-up
    np.fft.rfft(x)
    ratios, alls, ffts = [], [], []
    for _ in range(5):  # interleave, so a busy machine slows both alike
        t_fft = best(lambda: np.fft.rfft(x), 5)
        t_all = best(lambda: analyze(cap), 3)
        ratios.append(t_all / t_fft)
        alls.append(t_all)
        ffts.append(t_fft)
    print(f"1e6 samples: full measurement set {np.median(alls) * 1e3:.0f} ms, one rfft {np.median(ffts) * 1e3:.1f} ms, "
          f"ratio {np.median(ratios):.1f}× median (runs: {', '.join(f'{r:.1f}' for r in sorted(ratios))}; "
          f"target ≤ 10×, goal 5×)")
    cmd = [sys.executable, "-m", "benchgate", "--help"]
    base = [sys.executable, "-c", "pass"]
    t_help = best(lambda: subprocess.run(cmd, capture_output=True, check=True), 5)
    t_py = best(lambda: subprocess.run(base, capture_output=True, check=True), 5)
    print(f"benchgate --help: {t_help * 1e3:.0f} ms wall (bare python start-up {t_py * 1e3:.0f} ms; target ≤ 300 ms)")


if __name__ == "__main__":
    main()
