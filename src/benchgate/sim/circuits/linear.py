"""Exact discretisation of linear time-invariant systems (numpy only).

The circuit models integrate their linear part exactly: over one step of length ``h`` with the
input varying linearly between the step's end points (a first-order hold), the state update is

    x[k+1] = Phi x[k] + (Gamma1 - Gamma2) u[k] + Gamma2 u[k+1]

with Phi = exp(A h), Gamma1 = ∫0^h exp(A s) ds B and Gamma2 = ∫0^h exp(A s) (h - s)/h ds B, read
off one block-matrix exponential (Van Loan's construction: C. F. Van Loan, "Computing integrals
involving the matrix exponential", IEEE Trans. Autom. Control 23(3), 1978; docs/references.md).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np


def expm(a: np.ndarray) -> np.ndarray:
    """Matrix exponential by scaling and squaring with a Taylor series.

    Parameters
    ----------
    a : ndarray, shape (n, n)
        Square matrix.

    Returns
    -------
    ndarray, shape (n, n)
        exp(a), accurate to about 1e-13 relative for the small matrices used here.

    Notes
    -----
    The matrix is halved s times until its 1-norm is at most 1/4, the Taylor series is summed
    to 17 terms, and the result squared s times.

    References
    ----------
    C. Moler and C. Van Loan, "Nineteen dubious ways to compute the exponential of a matrix",
    SIAM Review 20(4), 1978, and "... twenty-five years later", SIAM Review 45(1), 2003
    (scaling and squaring, here with a Taylor rather than a Padé approximant).
    """
    a = np.asarray(a, dtype=np.float64)
    if a.ndim != 2 or a.shape[0] != a.shape[1]:
        raise ValueError(f"expm needs a square matrix, got shape {a.shape}")
    norm = float(np.max(np.sum(np.abs(a), axis=1))) if a.size else 0.0
    squarings = max(0, int(np.ceil(np.log2(norm / 0.25)))) if norm > 0.25 else 0
    scaled = a / (2.0**squarings)
    result = np.eye(a.shape[0])
    term = np.eye(a.shape[0])
    for k in range(1, 18):
        term = term @ scaled / k
        result = result + term
    for _ in range(squarings):
        result = result @ result
    return result


@dataclass(frozen=True)
class FirstOrderHold:
    """Discretised x' = A x + B u (single input) for a step ``h`` with a first-order hold."""

    phi: np.ndarray  # (n, n)
    g0: np.ndarray  # (n,)  multiplies u[k]
    g1: np.ndarray  # (n,)  multiplies u[k+1]

    @classmethod
    def build(cls, a: np.ndarray, b: np.ndarray, h: float) -> FirstOrderHold:
        a = np.asarray(a, dtype=np.float64)
        b = np.asarray(b, dtype=np.float64).reshape(-1)
        n = a.shape[0]
        m = np.zeros((n + 2, n + 2))
        m[:n, :n] = a * h
        m[:n, n] = b * h
        m[n, n + 1] = 1.0
        e = expm(m)
        phi = e[:n, :n]
        gamma1 = e[:n, n]
        gamma2 = e[:n, n + 1]
        return cls(phi=phi, g0=gamma1 - gamma2, g1=gamma2)
