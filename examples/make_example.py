"""Make examples/tone-board-capture.csv: an invented TB-3 tone board capture.

Owl Hollow Kits' TB-3 (invented): a phase-shift oscillator near 955 Hz, seen through a
fixture that AC-couples it to the ADC mid-rail (1.65 V). The capture starts at power-on:
the oscillation grows from noise, saturates softly to about 1 V peak with a little third
harmonic, and the coupling capacitor's DC settles. Sampled by a 12-bit, 3.3 V ADC at
50 kS/s for 0.4 s. Run: python examples/make_example.py
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

FS = 50_000.0
DURATION = 0.4
F0 = 955.2
AMPLITUDE = 1.0
GROWTH = 0.012  # s, time constant of the exponential growth
DELAY = 0.010  # s, time until the oscillation is about 1 % of its final size
BITS, VREF = 12, 3.3


def make(seed: int = 955) -> np.ndarray:
    rng = np.random.default_rng(seed)
    t = np.arange(int(FS * DURATION)) / FS
    # logistic envelope: exponential growth, then soft amplitude limiting
    env = AMPLITUDE / (1.0 + np.exp(-(t - DELAY - 4.6 * GROWTH) / GROWTH))
    phase = 2 * np.pi * F0 * t + 0.4
    wave = env * (np.sin(phase) - 0.025 * np.sin(3 * phase)) / 1.0
    dc = 1.65 - 0.35 * np.exp(-t / 0.015)  # coupling capacitor settling after power-on
    x = dc + wave + rng.normal(0.0, 0.002, t.size)
    lsb = VREF / 2**BITS
    return np.clip(np.round(x / lsb), 0, 2**BITS - 1) * lsb


def main() -> None:
    out = Path(__file__).with_name("tone-board-capture.csv")
    x = make()
    with out.open("w", encoding="ascii", newline="\n") as fh:
        fh.write("# Owl Hollow Kits TB-3 tone board (invented example), ADC channel 'out'\n")
        fh.write(f"# sample_rate: {FS:g}\n")
        fh.write(f"# adc: {BITS} bits, 0 to {VREF} V; capture starts at power-on\n")
        fh.write("volts\n")
        fh.writelines(f"{v:.6f}\n" for v in x)
    print(f"wrote {out} ({x.size} samples)")


if __name__ == "__main__":
    main()
