"""Order statistics without sorting a whole capture: a counting proof that a median absolute
deviation is at least a given value.

A median over 10⁶ samples costs a selection pass (numpy.partition) of about a fifth of an FFT;
when all that is wanted is whether the median absolute deviation (MAD) reaches a bound, three
counting passes over the data settle it in nearly every case, and the exact selection runs only
when they cannot.
"""

from __future__ import annotations

import math

import numpy as np

#: every how many-th value goes into the subsample that brackets the median.
SUBSAMPLE_STEP = 64
#: half-width of the median bracket in standard deviations of a subsample median's rank.
BRACKET_SD = 5.0


def mad_at_least(d: np.ndarray, bound: float) -> bool:
    """True when median(|d − median(d)|) ≥ ``bound`` is proven by counting; False when it is not
    (the MAD may still be that large: compute it).

    Parameters
    ----------
    d : numpy.ndarray
        Finite values.
    bound : float
        The value the MAD is compared with (≥ 0).

    Notes
    -----
    With numpy's median (the mean of the two middle order statistics for an even count), for
    n values and h = ⌈n/2⌉: median(d) ≥ lo when fewer than h values lie below lo, and
    median(d) ≤ hi when fewer than h lie above hi. Every value within ``bound`` of the median
    then lies in (lo − bound, hi + bound); when fewer than h values lie there, the h-th
    smallest absolute deviation, and with it the MAD, is at least ``bound``. lo and hi are
    order statistics of a subsample, five standard deviations of rank either side of its
    median (the rank of a sample quantile scatters binomially), so the bracket nearly always
    holds and is narrow. (Derived from the definition of order statistics; the median as
    numpy.median defines it.)
    """
    n = int(d.size)
    if n < 4 * SUBSAMPLE_STEP or not bound >= 0.0:
        return False
    half = (n + 1) // 2  # ⌈n/2⌉
    sub = np.sort(d[::SUBSAMPLE_STEP])
    k = sub.size
    spread = int(math.ceil(BRACKET_SD * 0.5 * math.sqrt(k)))
    lo = float(sub[max(k // 2 - spread, 0)])
    hi = float(sub[min(k // 2 + spread, k - 1)])
    if np.count_nonzero(d < lo) >= half or np.count_nonzero(d > hi) >= half:
        return False  # the bracket does not hold the median: no proof
    # values in (lo − bound, hi + bound), counted as two comparisons (no temporary of floats)
    near = int(np.count_nonzero(d > lo - bound)) - int(np.count_nonzero(d >= hi + bound))
    return near < half
