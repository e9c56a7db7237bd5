"""Is there a tone? The fitted sine's power against the noise floor around its own frequency.

The fitted fundamental counts as a tone when its periodogram peak, N·A²/4 (V², the scale of
|X_k|²/N of a untapered (rectangular) DFT), stands far enough above the noise expected in one bin
*at that frequency*. Measuring that noise with one number for the whole capture (the fit's
residual variance) assumes white noise; with 1/f ("pink") noise the low bins hold many times
the average noise and a noise-only capture would pass as a low tone. The local floor is read
from the spectrum of the fit residual near the tone instead.
"""

from __future__ import annotations

import math

import numpy as np

from benchgate.analysis.spectrum import Spectrum, interpolated_peak, mean_square, power_spectrum

#: detection margin m (natural-log units): P_FA ≈ e^(−m) per capture for a known floor.
DETECTION_MARGIN = 25.0
#: fewest neighbouring bins the local floor is read from (below this: the global floor alone).
MIN_FLOOR_BINS = 8
#: steepest power law (1/f^α) the floor is extrapolated along below the neighbouring bins.
MAX_SLOPE = 3.0
#: Euler–Mascheroni constant: E[ln X] = ln(mean) − γ for an exponentially distributed X.
EULER_GAMMA = 0.5772156649015329
#: log-power excess above the fitted power law beyond which a bin is no noise (e^3 ≈ 20×).
OUTLIER = 3.0
#: lowest bin searched for a prominent peak (a tone needs 3 cycles to be measured at all).
MIN_PEAK_BIN = 4


def detection_threshold(n: int) -> float:
    """Smallest N·A²/(4σ²) counted as a tone in a capture of ``n`` samples.

    Parameters
    ----------
    n : int
        Samples in the capture.

    Returns
    -------
    float
        ln(N) + m with m = :data:`DETECTION_MARGIN` = 25.

    Notes
    -----
    For Gaussian noise each periodogram bin, divided by its expected value, is exponentially
    distributed (χ² with 2 degrees of freedom, halved), so one bin exceeds γ times its mean
    with probability e^(−γ); over the N/2 bins searched the largest exceeds ln(N/2) + m with
    probability about e^(−m). m = 25 (P_FA ≈ 1e-11 with a known floor) leaves ample room for the
    error of an estimated floor (:func:`local_floor`).

    References
    ----------
    S. M. Kay, Fundamentals of Statistical Signal Processing, Vol. II: Detection Theory,
    Prentice Hall, 1998, ch. 7 (periodogram detector of a sinusoid, exponential bins, false-
    alarm probability); D. C. Rife and R. R. Boorstyn, IEEE Trans. Inf. Theory 20(5), 1974.
    """
    return math.log(max(n, 2)) + DETECTION_MARGIN


def beyond_any_local_floor(n: int, cycles: float, taper: str) -> float:
    """A detection statistic N·A²/(4σ²_r) (σ²_r the residual variance) at or above this value
    passes against any floor :func:`local_floor` can return, so that floor need not be computed.

    At least half of M bins lie at or above their median, so a median is at most 2/M of their
    sum; the bins of a tapered spectrum sum to at most 1/mean(w²) times the residual's
    variance (all of it where the taper is 1); M ≥ MIN_FLOOR_BINS. Hence
    local floor ≤ σ²_r·N/(M·ln 2·mean(w²)) (derived). Tones of fewer than 17 cycles, whose
    floor may also be extrapolated along a power law, are always checked (returns inf).
    """
    if cycles < 17.0:
        return math.inf
    return detection_threshold(n) * n / (MIN_FLOOR_BINS * math.log(2.0) * mean_square(taper))


def local_floor(spec: Spectrum, cycles: float) -> float | None:
    """Noise floor at the tone's frequency from the spectrum of the fit residual around it.

    Parameters
    ----------
    spec : Spectrum
        Tapered power spectrum of the residual (fitted sine removed); white noise of
        variance σ² gives E[power_k] = 2σ²/N, so ``power_k·N/2`` is in units of σ².
    cycles : float
        The tone's frequency in bins (cycles per capture).

    Returns
    -------
    float or None
        The floor (V²) a white noise of the same local density would have, or None when
        fewer than :data:`MIN_FLOOR_BINS` neighbouring bins are available.

    Notes
    -----
    The bins from max(1, k₀ − W) to k₀ + W, W = max(16, k₀/2) (below the second harmonic),
    less the tone's own main lobe (|k − k₀| < half-width + 1 bins: 3 for Hann, 5 for
    Blackman–Harris), where removing the fitted sine also removed noise, give the floor as
    their median divided by ln 2: for Gaussian noise each bin is exponentially distributed
    about its mean, whose median is ln 2 times the mean. The median is the ordered-statistic
    estimate of constant-false-alarm-rate detectors; it ignores the odd spur or harmonic in
    the band. Coloured noise changes over the band (1/f noise below a tone of a few cycles,
    where the band extends upward only, would be read too low), so the floor is the larger of
    the band's median and the median of the MIN_FLOOR_BINS nearest bins beyond the lobe; when
    the band is cut at bin 1 (a tone of a few cycles), also the value at k₀ of a power law
    S ∝ k^−α (α ≤ 3) fitted by least squares to the log bins (bins more than e³ above the
    line, such as harmonics, left out), each corrected by the Euler–Mascheroni constant (the
    mean of the log of an exponential variable is ln(mean) − γ). The margin of
    :func:`detection_threshold` absorbs the rest (the pink- and brown-noise tests in
    tests/analysis check it).

    References
    ----------
    H. Rohling, "Radar CFAR thresholding in clutter and multiple target situations", IEEE Trans.
    Aerosp. Electron. Syst. 19(4), 1983 (ordered-statistic CFAR); Kay (1998), ch. 7
    (exponential distribution of periodogram bins of Gaussian noise); J. Geweke and
    S. Porter-Hudak, "The estimation and application of long memory time series models",
    J. Time Series Analysis 4(4), 1983 (log-periodogram regression of a power-law spectrum).
    """
    p = spec.power
    k0 = float(cycles)
    width = max(16.0, 0.5 * k0)
    lo = max(1, int(math.floor(k0 - width)))
    hi = min(p.size - 2, int(math.ceil(k0 + width)))  # the Nyquist bin is not a full bin
    if hi <= lo:
        return None
    k = np.arange(lo, hi + 1)
    dist = np.abs(k - k0)
    lobe = spec.half_width + 1.0  # the main lobe, where removing the fitted sine removed noise too
    use = dist >= lobe
    if np.count_nonzero(use) < MIN_FLOOR_BINS:
        return None
    near = use & (dist < lobe + MIN_FLOOR_BINS)
    band = p[lo:hi + 1]
    level = max(float(np.median(band[use])), float(np.median(band[near])))
    if k0 - width < 1.0:
        # the band is cut at the bottom (a tone of a few cycles), where coloured noise changes
        # fastest: also read the floor at k0 off a power law S ∝ k^−α fitted to the log bins
        # (log-periodogram regression; E[ln P] = ln S − γ for an exponential bin), refitted
        # without the bins far above the line (a distorted waveform's harmonics: a noise bin
        # lies e^OUTLIER above its mean with probability exp(−e^OUTLIER), below 1e-8)
        x = np.log(k[use].astype(float))
        z = np.log(np.maximum(band[use], np.finfo(float).tiny)) + EULER_GAMMA
        keep = np.ones(x.size, dtype=bool)
        slope = intercept = 0.0
        for _ in range(4):
            if np.count_nonzero(keep) < MIN_FLOOR_BINS or np.ptp(x[keep]) <= 0:
                break
            slope, intercept = (float(v) for v in np.polyfit(x[keep], z[keep], 1))
            slope = max(slope, -MAX_SLOPE)
            fresh = z - (intercept + slope * x) < OUTLIER
            if np.array_equal(fresh, keep):
                break
            keep = fresh
        if np.count_nonzero(keep) >= MIN_FLOOR_BINS:
            level = max(level, float(np.exp(intercept + slope * math.log(max(k0, 1.0)))) * math.log(2.0))
    return level / math.log(2.0) * spec.n / 2.0


def most_prominent_peak(y: np.ndarray, candidates: int = 16) -> float | None:
    """Angular frequency (rad/sample) of the spectral peak that stands highest above its local
    floor, among the ``candidates`` largest local maxima of the Hann spectrum from bin
    :data:`MIN_PEAK_BIN` up; None if none.

    Used when the strongest peak fails detection: under coloured noise a weaker tone at a
    higher frequency may stand far above its own floor while the noise is strongest below it.

    References
    ----------
    Rohling (1983) and Kay (1998), as for :func:`local_floor`; the peak position by
    M. Gasior and J. L. Gonzalez, AIP Conf. Proc. 732, 2004 (parabolic interpolation).
    """
    y = np.asarray(y, dtype=float)
    spec = power_spectrum(y, 1.0, "hann")
    p = spec.power
    if p.size < 8:
        return None
    inner = p[MIN_PEAK_BIN:-2]
    peaks = np.flatnonzero((inner > p[MIN_PEAK_BIN - 1:-3]) & (inner >= p[MIN_PEAK_BIN + 1:-1])) + MIN_PEAK_BIN
    if peaks.size == 0:
        return None
    peaks = peaks[np.argsort(p[peaks])[::-1][:candidates]]
    best, best_ratio = None, 0.0
    for k in peaks:
        floor = local_floor(spec, float(k))
        if floor is None or not floor > 0:
            continue
        ratio = p[k] * spec.n / 2.0 / floor
        if ratio > best_ratio:
            best, best_ratio = int(k), ratio
    if best is None:
        return None
    return 2.0 * math.pi * interpolated_peak(np.sqrt(p), best) / y.size
