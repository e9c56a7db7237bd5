"""Network analysis of the oscillator circuits the plan format knows, numerically (vectorised over parts).

Every function takes numpy arrays of component values in SI units (Ω, F, H), all of the same
shape (one element per corner or Monte Carlo draw), and returns arrays of the same shape.
Oscillation frequencies are found as the root of the loop phase condition by bisection on
the circuit's own network equations; the handbook shortcuts (docs/references.md) are what the tests
compare with, not what the code uses.
"""

from __future__ import annotations

import math

import numpy as np

_ROOT_STEPS = 24  # regula falsi steps; converged to rounding well before that
_GRID = np.logspace(-4, 4, 65)  # search grid, relative to the circuit's own time scale
_CHUNK = 2048  # draws evaluated at once on the grid (memory bound)


def _bisect(fun, lo: np.ndarray, hi: np.ndarray) -> np.ndarray:
    """Vectorised root of ``fun(ω)`` (real) inside brackets [lo, hi] with a sign change.

    Illinois-modified regula falsi on log ω: it keeps the bracket like bisection but
    converges superlinearly; a fixed number of steps treats every element alike.
    """
    a, b = np.log(lo), np.log(hi)
    fa, fb = fun(lo), fun(hi)
    side = np.zeros(a.shape)
    for _ in range(_ROOT_STEPS):
        denom = fb - fa
        ok = (denom != 0) & (a != b)
        c = np.where(ok, b - fb * (b - a) / np.where(ok, denom, 1.0), 0.5 * (a + b))
        c = np.clip(c, np.minimum(a, b), np.maximum(a, b))
        fc = fun(np.exp(c))
        left = np.sign(fc) == np.sign(fa)  # the root lies between c and b: c replaces a
        fb = np.where(left & (side == 1), fb / 2, fb)  # Illinois: halve the end kept twice
        fa = np.where(~left & (side == -1), fa / 2, fa)
        a, fa, b, fb = (np.where(left, c, a), np.where(left, fc, fa),
                        np.where(left, b, c), np.where(left, fb, fc))
        side = np.where(left, 1, -1)
    return np.exp(np.where(np.abs(fa) < np.abs(fb), a, b))


# --------------------------------------------------------------------------- RC ladder


def _ladder_a(w: np.ndarray, R: np.ndarray, C: np.ndarray, form: str,
              source: np.ndarray, load: np.ndarray) -> np.ndarray:
    """Element A of the ABCD chain matrix (source -> sections -> load), so Vout/Vemf = 1/A.

    ``w`` has shape (M, K) or (M,); R and C have shape (M, N); source and load shape (M,)
    (load = inf for an open output). Only the first row (A, B) of the running product is
    needed for A.
    """
    extra = (slice(None),) + (None,) * (w.ndim - 1)
    jw = 1j * w
    a = np.ones_like(jw)
    b = np.broadcast_to(source[extra], w.shape).astype(complex)  # series source resistance
    for i in range(R.shape[1]):
        r = R[:, i][extra]
        c = C[:, i][extra]
        if form == "highpass":  # series C, shunt R
            z, y = 1.0 / (jw * c), 1.0 / r
        else:  # lowpass: series R, shunt C
            z, y = r, jw * c
        b = a * z + b          # [[a, b]] @ [[1, z], [0, 1]]
        a = a + b * y          # [[a, b]] @ [[1, 0], [y, 1]]
    yl = np.where(np.isfinite(load), 1.0 / np.where(np.isfinite(load), load, 1.0), 0.0)[extra]
    return a + b * yl


def rc_ladder(R: np.ndarray, C: np.ndarray, *, form: str = "highpass",
              source: np.ndarray | None = None, load: np.ndarray | None = None) -> dict[str, np.ndarray]:
    """Phase-shift ladder: frequency of 180° phase shift and the gain an inverting amplifier needs.

    Parameters
    ----------
    R, C : ndarray, shape (M, N)
        Resistance (Ω) and capacitance (F) of each of the N ≥ 3 sections, for M cases.
    form : {"highpass", "lowpass"}
        ``highpass``: series C, shunt R. ``lowpass``: series R, shunt C.
    source : ndarray, shape (M,), optional
        Source (driving amplifier output) resistance in Ω, in series with the input; default 0.
    load : ndarray, shape (M,), optional
        Load (amplifier input) resistance in Ω across the output; default open (inf).

    Returns
    -------
    dict
        ``frequency`` (Hz) where Vout/Vin is real and negative, found on the unwrapped phase
        from the transparent end of the ladder; ``gain_needed`` = |Vin/Vout| there.
        NaN where no 180° point exists in the search range.

    Notes
    -----
    Each section is the product of a series-impedance and a shunt-admittance ABCD matrix; the
    open-circuit voltage transfer of the chain is 1/A.

    References
    ----------
    Handbook values (docs/references.md): three equal sections give 1/(2πRC√6) (high-pass) or
    √6/(2πRC) (low-pass) with attenuation 1/29.
    """
    R = np.atleast_2d(np.asarray(R, float))
    C = np.atleast_2d(np.asarray(C, float))
    M, N = R.shape
    if N < 3 or C.shape != R.shape:
        raise ValueError("rc_ladder needs R and C of the same shape (M, N) with N >= 3")
    if form not in ("highpass", "lowpass"):
        raise ValueError(f"unknown ladder form {form!r}")
    src = np.zeros(M) if source is None else np.broadcast_to(np.asarray(source, float), (M,))
    ld = np.full(M, np.inf) if load is None else np.broadcast_to(np.asarray(load, float), (M,))
    freq = np.full(M, np.nan)
    gain = np.full(M, np.nan)
    for start in range(0, M, _CHUNK):
        sl = slice(start, start + _CHUNK)
        r, c, s, lo_ = R[sl], C[sl], src[sl], ld[sl]
        tau = np.exp(np.mean(np.log(r * c), axis=1))  # geometric-mean time constant
        grid = _GRID[None, :] / tau[:, None]
        if form == "highpass":
            grid = grid[:, ::-1]  # start where the ladder is transparent (high ω)
        a = _ladder_a(grid, r, c, form, s, lo_)
        phase = np.abs(np.unwrap(np.angle(a), axis=1))
        crossed = phase >= math.pi
        has = crossed.any(axis=1)
        k = np.argmax(crossed, axis=1)
        k = np.clip(k, 1, grid.shape[1] - 1)
        rows = np.arange(grid.shape[0])
        w1, w2 = grid[rows, k - 1], grid[rows, k]
        lo, hi = np.minimum(w1, w2), np.maximum(w1, w2)

        def im_a(w, r=r, c=c, s=s, ld_=lo_):
            return _ladder_a(w, r, c, form, s, ld_).imag

        w = _bisect(im_a, lo, hi)
        a0 = _ladder_a(w, r, c, form, s, lo_)
        ok = has & (a0.real < 0)
        freq[sl] = np.where(ok, w / (2 * math.pi), np.nan)
        gain[sl] = np.where(ok, np.abs(a0), np.nan)
    return {"frequency": freq, "gain_needed": gain}


# --------------------------------------------------------------------------- Wien bridge


def wien_bridge(R1, R2, C1, C2) -> dict[str, np.ndarray]:
    """Wien network (series R1–C1, shunt R2 ∥ C2): zero-phase frequency and the gain needed.

    Parameters
    ----------
    R1, R2 : ndarray
        Series and shunt resistance (Ω).
    C1, C2 : ndarray
        Series and shunt capacitance (F).

    Returns
    -------
    dict
        ``frequency`` (Hz) where the feedback fraction β = Zp/(Zs+Zp) is real, found by
        bisection on Im(1/β); ``gain_needed`` = 1/β there (non-inverting amplifier).

    References
    ----------
    Handbook formulas (docs/references.md): f = 1/(2π√(R1R2C1C2)); equal parts give β = 1/3.
    """
    R1, R2, C1, C2 = (np.asarray(x, float) for x in np.broadcast_arrays(R1, R2, C1, C2))

    def inv_beta(w):
        zs = R1 + 1.0 / (1j * w * C1)
        yp = 1.0 / R2 + 1j * w * C2
        return 1.0 + zs * yp

    scale = 1.0 / np.sqrt(R1 * C1 * R2 * C2)  # only to centre the search bracket
    w = _bisect(lambda w: inv_beta(w).imag, scale * 1e-3, scale * 1e3)
    return {"frequency": w / (2 * math.pi), "gain_needed": inv_beta(w).real}


# --------------------------------------------------------------------------- timer astable


def timer_astable(R1, R2, C, *, lower: float = 1 / 3, upper: float = 2 / 3) -> dict[str, np.ndarray]:
    """Timer astable (charge through R1+R2, discharge through R2): frequency and high-time duty.

    Parameters
    ----------
    R1, R2 : ndarray
        Timing resistors (Ω).
    C : ndarray
        Timing capacitor (F).
    lower, upper : float
        Comparator thresholds as fractions of the supply (1/3 and 2/3 for the classic timer).

    Returns
    -------
    dict
        ``frequency`` (Hz), ``duty`` (fraction of the period the output is high),
        ``t_high`` and ``t_low`` (s).

    Notes
    -----
    From the RC charging law: charging from ``lower`` toward the supply takes
    (R1+R2)·C·ln((1−lower)/(1−upper)); discharging from ``upper`` toward 0 takes
    R2·C·ln(upper/lower). Both are ln 2 times the time constant for 1/3 and 2/3.
    """
    R1, R2, C = (np.asarray(x, float) for x in np.broadcast_arrays(R1, R2, C))
    if not 0 < lower < upper < 1:
        raise ValueError("thresholds need 0 < lower < upper < 1")
    t_high = (R1 + R2) * C * math.log((1 - lower) / (1 - upper))
    t_low = R2 * C * math.log(upper / lower)
    period = t_high + t_low
    return {"frequency": 1.0 / period, "duty": t_high / period, "t_high": t_high, "t_low": t_low}


# --------------------------------------------------------------------------- LC tank


def colpitts(L, C1, C2) -> dict[str, np.ndarray]:
    """Colpitts tank (L across the series pair C1, C2): resonance and gain needed.

    ``frequency`` is the zero of the loop reactance ωL − 1/(ωC1) − 1/(ωC2), by bisection.
    ``gain_needed`` = C2/C1 for the convention that the amplifier output drives C1 and its
    input is taken across C2 (feedback fraction C1/C2).

    References
    ----------
    Handbook formula (docs/references.md): f = 1/(2π√(L·C1C2/(C1+C2))).
    """
    L, C1, C2 = (np.asarray(x, float) for x in np.broadcast_arrays(L, C1, C2))

    def x(w):
        return w * L - 1.0 / (w * C1) - 1.0 / (w * C2)

    scale = 1.0 / np.sqrt(L * np.minimum(C1, C2))
    w = _bisect(x, scale * 1e-3, scale * 1e3)
    return {"frequency": w / (2 * math.pi), "gain_needed": C2 / C1}


def hartley(L1, L2, C, M=0.0) -> dict[str, np.ndarray]:
    """Hartley tank (tapped inductor L1 + L2 with mutual inductance M, across C).

    ``frequency`` is the zero of the loop reactance ω(L1+L2+2M) − 1/(ωC), by bisection;
    ``gain_needed`` = (L1+M)/(L2+M) with the output across L1 and the input across L2.

    References
    ----------
    Handbook formula (docs/references.md, from memory): f = 1/(2π√((L1+L2+2M)·C)).
    """
    L1, L2, C, M = (np.asarray(x, float) for x in np.broadcast_arrays(L1, L2, C, M))

    def x(w):
        return w * (L1 + L2 + 2 * M) - 1.0 / (w * C)

    scale = 1.0 / np.sqrt(np.maximum(L1 + L2, 1e-300) * C)
    w = _bisect(x, scale * 1e-3, scale * 1e3)
    return {"frequency": w / (2 * math.pi), "gain_needed": (L1 + M) / (L2 + M)}
