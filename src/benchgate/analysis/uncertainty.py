"""Uncertainty budgets: Cramér–Rao terms from the fit residual, sample clock, quantisation.

Every function returns standard uncertainties (k = 1); :func:`expand` combines them in
quadrature and applies the coverage factor k = 2 (JCGM 100:2008, about 95 %).
"""

from __future__ import annotations

import math

from benchgate.analysis.capture import AdcInfo

#: coverage factor for the expanded uncertainty (JCGM 100:2008, 6.3).
K_COVERAGE = 2.0


def expand(*standard: float) -> float:
    """Expanded uncertainty U = k·√(Σu²) with k = 2."""
    return K_COVERAGE * math.sqrt(sum(u * u for u in standard))


def crlb_frequency_std(eta: float, n: int) -> float:
    """Cramér–Rao standard deviation of frequency, cycles per sample.

    Parameters
    ----------
    eta : float
        Signal-to-noise ratio A²/(2σ²), linear.
    n : int
        Number of samples.

    References
    ----------
    D. C. Rife and R. R. Boorstyn, "Single-tone parameter estimation from discrete-time
    observations", IEEE Trans. Inf. Theory 20(5), 1974; S. M. Kay, Fundamentals of
    Statistical Signal Processing, Vol. I, 1993: var(f) ≥ 12 / ((2π)²·η·N·(N²−1)).
    """
    if n < 2 or eta <= 0:
        return math.inf
    if math.isinf(eta):
        return 0.0
    return math.sqrt(12.0 / ((2.0 * math.pi) ** 2 * eta * n * (n * n - 1.0)))


def crlb_amplitude_std(noise_var: float, n: int) -> float:
    """Cramér–Rao standard deviation of the peak amplitude (V): √(2σ²/N).

    References
    ----------
    Rife and Boorstyn (1974); Kay (1993).
    """
    if n < 1:
        return math.inf
    return math.sqrt(2.0 * max(noise_var, 0.0) / n)


def clock_std(value: float, clock_ppm: float | None) -> float:
    """Standard uncertainty of a frequency or time from a rectangular clock tolerance bound."""
    if not clock_ppm:
        return 0.0
    return abs(value) * clock_ppm * 1e-6 / math.sqrt(3.0)


def quantisation_std(adc: AdcInfo | None) -> float:
    """Standard uncertainty of one reading from the ADC's resolution: Q/√12 (GUM F.2.2.1)."""
    if adc is None:
        return 0.0
    return adc.lsb / math.sqrt(12.0)
