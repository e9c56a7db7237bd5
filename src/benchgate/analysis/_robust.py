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
    return _proven(int(d.size), d[::SUBSAMPLE_STEP], lambda: iter((d,)), bound)


def mad_of_differences_at_least(y: np.ndarray, bound: float) -> bool:
    """:func:`mad_at_least` for d = numpy.diff(y), without making d: the differences are formed
    and counted a chunk at a time (the same values, counted the same way)."""
    n = int(y.size) - 1
    if n < 1:
        return False

    def chunks():
        for first in range(0, n, CHUNK):
            last = min(first + CHUNK, n)
            yield y[first + 1:last + 1] - y[first:last]

    sub = y[1::SUBSAMPLE_STEP][: -(-n // SUBSAMPLE_STEP)] - y[:-1:SUBSAMPLE_STEP][: -(-n // SUBSAMPLE_STEP)]
    return _proven(n, sub, chunks, bound)


#: values formed and counted at a time by :func:`mad_of_differences_at_least`.
CHUNK = 65536


def _proven(n: int, subsample: np.ndarray, chunks, bound: float) -> bool:
    """The counting proof of :func:`mad_at_least` over ``n`` values given as ``chunks()`` (an
    iterable of arrays, called once per count) and a subsample of them."""
    if n < 4 * SUBSAMPLE_STEP or not bound >= 0.0:
        return False
    half = (n + 1) // 2  # ⌈n/2⌉
    sub = np.sort(subsample)
    k = sub.size
    spread = int(math.ceil(BRACKET_SD * 0.5 * math.sqrt(k)))
    lo = float(sub[max(k // 2 - spread, 0)])
    hi = float(sub[min(k // 2 + spread, k - 1)])
    below = above = near_lo = near_hi = 0
    for d in chunks():
        below += int(np.count_nonzero(d < lo))
        above += int(np.count_nonzero(d > hi))
        # values in (lo − bound, hi + bound), counted as two comparisons (no temporary of floats)
        near_lo += int(np.count_nonzero(d > lo - bound))
        near_hi += int(np.count_nonzero(d >= hi + bound))
    if below >= half or above >= half:
        return False  # the bracket does not hold the median: no proof
    return near_lo - near_hi < half
