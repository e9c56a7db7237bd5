"""Gain stages and filters the plan format knows: the outputs a plan window can be derived from.

Like :mod:`benchgate.plan.network` (the oscillators), every function takes numpy arrays of
component values in SI units, one element per tolerance corner or Monte Carlo draw, and
returns arrays of the same shape. The filters are computed from their transfer functions'
denominators; the −3 dB frequency of the second-order sections comes from solving
|H(jω)|² = 1/2 exactly (a quadratic in ω²). The handbook shortcuts (docs/references.md "Oscillator and
filter formulas", from memory) and scipy.signal.freqs are what the tests compare with.

Corner enumeration gives the extremes when each output is monotonic in each part. The gain
stages and the first-order filter are (closed forms). The unity-gain Sallen–Key −3 dB frequency
is monotonic in every part when C2·(R1+R2) > R2·C1 at the corner frequency (derived from
∂|D(jω)|²/∂R, with C2 the capacitor to ground), which holds for the usual designs (Q ≤ 0.7);
for others the Monte Carlo comparison in :func:`benchgate.plan.derive.analyze` widens the
window and says so.
"""

from __future__ import annotations

import math
from typing import Any

import numpy as np

#: topology -> (options with allowed values, parts: key -> unit, required parts, outputs);
#: merged into :data:`benchgate.plan.derive.TOPOLOGIES`.
TOPOLOGIES: dict[str, dict[str, Any]] = {
    "gain_stage": {
        "doc": "op-amp gain stage: non-inverting (1 + Rf/Rg) or inverting (−Rf/Rg, Rg the input resistor)",
        "options": {"type": ("noninverting", "inverting")},
        "parts": {"Rf": "Ω", "Rg": "Ω"},
        "required": ("Rf", "Rg"),
        "per_section": (),
        "outputs": {"gain": "gain", "gain_db": "gain_db", "passband_gain_db": "gain_db"},
        "formula": "|gain| = 1 + Rf/Rg (non-inverting) or Rf/Rg (inverting)",
    },
    "rc_filter": {
        "doc": "first-order RC filter: low-pass (series R, shunt C) or high-pass (series C, shunt R)",
        "options": {"form": ("lowpass", "highpass")},
        "parts": {"R": "Ω", "C": "F"},
        "required": ("R", "C"),
        "per_section": (),
        "outputs": {"f_3db_high": "f_3db_high", "f_3db_low": "f_3db_low"},
        "formula": "f_c = 1/(2πRC)",
    },
    "sallen_key": {
        "doc": "unity-gain Sallen–Key second-order filter (low-pass: R1, R2 in series, C1 to the "
               "output, C2 to ground; high-pass: R and C exchanged)",
        "options": {"form": ("lowpass", "highpass")},
        "parts": {"R1": "Ω", "R2": "Ω", "C1": "F", "C2": "F"},
        "required": ("R1", "R2", "C1", "C2"),
        "per_section": (),
        "outputs": {"f_3db_high": "f_3db_high", "f_3db_low": "f_3db_low", "f0": "f0", "q": "q"},
        "formula": "f0 = 1/(2π√(R1R2C1C2)); Q from the denominator; f_3db where |H|² = 1/2",
    },
}


def gain_stage(Rf: np.ndarray, Rg: np.ndarray, *, kind: str = "noninverting") -> dict[str, np.ndarray]:
    """Magnitude of an ideal op-amp stage's gain (V/V) and in dB.

    Parameters
    ----------
    Rf, Rg : numpy.ndarray
        Feedback resistor and the resistor to ground (non-inverting) or input resistor
        (inverting), Ω.
    kind : {"noninverting", "inverting"}

    Returns
    -------
    dict with ``gain`` (V/V, magnitude) and ``gain_db``.
    """
    Rf, Rg = np.asarray(Rf, float), np.asarray(Rg, float)
    if kind == "noninverting":
        g = 1.0 + Rf / Rg
    elif kind == "inverting":
        g = Rf / Rg
    else:
        raise ValueError(f"unknown gain stage type {kind!r}")
    return {"gain": g, "gain_db": 20.0 * np.log10(g)}


def rc_filter(R: np.ndarray, C: np.ndarray, *, form: str = "lowpass") -> dict[str, np.ndarray]:
    """Corner (−3 dB) frequency of a first-order RC filter, 1/(2πRC), under the name the
    measurement gives it: ``f_3db_high`` for a low-pass, ``f_3db_low`` for a high-pass."""
    fc = 1.0 / (2.0 * math.pi * np.asarray(R, float) * np.asarray(C, float))
    if form == "lowpass":
        return {"f_3db_high": fc}
    if form == "highpass":
        return {"f_3db_low": fc}
    raise ValueError(f"unknown filter form {form!r}")


def sallen_key_denominator(R1: np.ndarray, R2: np.ndarray, C1: np.ndarray, C2: np.ndarray, *,
                           form: str = "lowpass") -> tuple[np.ndarray, np.ndarray]:
    """Coefficients (a2, a1) of the denominator a2·s² + a1·s + 1 of a unity-gain Sallen–Key stage.

    Low-pass (R1, R2 in series; C1 from their junction to the output, C2 from the op-amp input
    to ground): a2 = R1R2C1C2, a1 = C2(R1 + R2). High-pass (C1, C2 in series; R1 from their
    junction to the output, R2 to ground): a2 = R1R2C1C2, a1 = R1(C1 + C2) (nodal analysis).
    """
    R1, R2, C1, C2 = (np.asarray(x, float) for x in (R1, R2, C1, C2))
    a2 = R1 * R2 * C1 * C2
    if form == "lowpass":
        return a2, C2 * (R1 + R2)
    if form == "highpass":
        return a2, R1 * (C1 + C2)
    raise ValueError(f"unknown filter form {form!r}")


def sallen_key(R1: np.ndarray, R2: np.ndarray, C1: np.ndarray, C2: np.ndarray, *,
               form: str = "lowpass") -> dict[str, np.ndarray]:
    """f0 (Hz), Q and the −3 dB frequency of a unity-gain Sallen–Key stage.

    Returns
    -------
    dict with ``f0``, ``q`` and ``f_3db_high`` (low-pass) or ``f_3db_low`` (high-pass).

    Notes
    -----
    With ω0² = 1/a2 and Q = √a2/a1, the low-pass |H(jω)|² = 1/2 where
    x = (ω/ω0)² solves x² − (2 − 1/Q²)·x − 1 = 0; the high-pass mirrors it (ω → ω0²/ω).
    """
    a2, a1 = sallen_key_denominator(R1, R2, C1, C2, form=form)
    w0 = 1.0 / np.sqrt(a2)
    q = np.sqrt(a2) / a1
    b = 2.0 - 1.0 / q ** 2
    x = 0.5 * (b + np.sqrt(b * b + 4.0))
    out = {"f0": w0 / (2.0 * math.pi), "q": q}
    if form == "lowpass":
        out["f_3db_high"] = w0 * np.sqrt(x) / (2.0 * math.pi)
    else:
        out["f_3db_low"] = w0 / np.sqrt(x) / (2.0 * math.pi)
    return out


def evaluate(topology: str, options: dict[str, Any], values: dict[str, np.ndarray]) -> dict[str, np.ndarray]:
    """Outputs of one of :data:`TOPOLOGIES` for arrays of part values."""
    if topology == "gain_stage":
        return gain_stage(values["Rf"], values["Rg"], kind=options["type"])
    if topology == "rc_filter":
        return rc_filter(values["R"], values["C"], form=options["form"])
    if topology == "sallen_key":
        return sallen_key(values["R1"], values["R2"], values["C1"], values["C2"], form=options["form"])
    raise ValueError(f"unknown topology {topology!r}")


def describe(topology: str, options: dict[str, Any]) -> str:
    key = "type" if topology == "gain_stage" else "form"
    return f"{topology} {options.get(key)}"
