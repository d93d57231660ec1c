"""Superlattices as integer (or rational) matrices: Hermite normal forms and equivalence.

Two matrices describe the same superlattice when their rows span the same lattice, i.e.
``M2 = U @ M1`` with ``U`` in GL(2, Z) (an integer matrix of determinant +-1). The Hermite
normal form used here is the upper triangular representative of that class::

    H = U @ M = [[h11, h12],
                 [  0, h22]]     h11 > 0,  h22 > 0,  0 <= h12 < h22

For a superlattice of index n = h11 * h22 in the substrate lattice there is exactly one such
H, so the HNFs of determinant n enumerate all superlattices of area n (in substrate cells);
there are sigma(n) of them (the sum of the divisors of n).

References
----------
.. [1] C. Hermite, "Sur l'introduction des variables continues dans la theorie des nombres",
   J. Reine Angew. Math. 41, 191 (1851).
.. [2] G. L. W. Hart and R. W. Forcade, "Algorithm for generating derivative structures",
   Phys. Rev. B 77, 224115 (2008) (enumeration of superlattices by HNFs).
"""

from __future__ import annotations

from fractions import Fraction

import numpy as np

from surfgeo.errors import NotationError
from surfgeo.lattice.rational import as_matrix, common_denominator, det2, inv2, is_exact, to_float


def _xgcd(a: int, b: int) -> tuple[int, int, int]:
    """(g, x, y) with g = gcd(a, b) >= 0 and a x + b y = g."""
    x0, y0, x1, y1 = 1, 0, 0, 1
    while b:
        q, a, b = a // b, b, a % b
        x0, x1 = x1, x0 - q * x1
        y0, y1 = y1, y0 - q * y1
    if a < 0:
        a, x0, y0 = -a, -x0, -y0
    return a, x0, y0


def hnf_ints(a: int, b: int, c: int, d: int) -> tuple[int, int, int]:
    """Hermite normal form of the integer matrix [[a, b], [c, d]] as (h11, h12, h22).

    Plain-integer fast path of :func:`hermite_normal_form` (no numpy), used in loops.
    """
    g, x, y = _xgcd(a, c)
    if g == 0:
        raise NotationError("the matrix is singular (its first column is zero); rows must span a 2D lattice.")
    det = a * d - b * c
    if det == 0:
        raise NotationError("the matrix is singular (determinant 0); rows must span a 2D lattice.")
    h22 = abs(det) // g
    h12 = (x * b + y * d) % h22
    return g, h12, h22


def hermite_normal_form(M) -> tuple[np.ndarray, np.ndarray]:
    """Hermite normal form of a non-singular integer 2x2 matrix.

    Parameters
    ----------
    M : array_like of int, shape (2, 2)

    Returns
    -------
    H : ndarray of int64, shape (2, 2)
        Upper triangular, ``H[0, 0] > 0``, ``H[1, 1] > 0``, ``0 <= H[0, 1] < H[1, 1]``.
    U : ndarray of int64, shape (2, 2)
        Unimodular with ``H = U @ M``.

    Raises
    ------
    NotationError
        If ``M`` is singular or not integer.
    """
    Mi = _integer_matrix(M)
    a, b, c, d = (int(v) for v in Mi.ravel())
    g, x, y = _xgcd(a, c)
    if a * d - b * c == 0:
        raise NotationError("the matrix is singular (determinant 0); rows must span a 2D lattice.")
    # first row: x*row1 + y*row2 has first entry g; second row: (-c/g)*row1 + (a/g)*row2 has 0
    U = np.array([[x, y], [-c // g, a // g]], dtype=object)
    H = U @ np.array([[a, b], [c, d]], dtype=object)
    if H[1, 1] < 0:
        U[1] = -U[1]
        H[1] = -H[1]
    k = H[0, 1] // H[1, 1]
    U[0] = U[0] - k * U[1]
    H[0] = H[0] - k * H[1]
    return H.astype(np.int64), U.astype(np.int64)


def hermite_normal_forms(n: int) -> list[np.ndarray]:
    """All 2x2 integer Hermite normal forms of determinant ``n``.

    These are the matrices of all superlattices with ``n`` substrate cells per superlattice
    cell, each exactly once; there are sigma(n) of them. Ordered by ``h11``, then ``h12``.

    Examples
    --------
    >>> [h.tolist() for h in hermite_normal_forms(2)]
    [[[1, 0], [0, 2]], [[1, 1], [0, 2]], [[2, 0], [0, 1]]]
    """
    n = int(n)
    if n < 1:
        raise NotationError(f"the area of a superlattice must be a positive integer, got {n}.")
    out = []
    for h11 in range(1, n + 1):
        if n % h11:
            continue
        h22 = n // h11
        for h12 in range(h22):
            out.append(np.array([[h11, h12], [0, h22]], dtype=np.int64))
    return out


def canonical(M) -> np.ndarray:
    """A canonical representative of the superlattice of ``M``.

    Integer matrices give their Hermite normal form (int64); rational matrices give
    ``HNF(d M) / d`` with ``d`` the common denominator (an ``object`` array of Fractions).
    Two matrices describe the same superlattice exactly when their canonical forms are equal.

    Raises
    ------
    NotationError
        For singular matrices, or irrational (incommensurate) ones, which have no exact
        canonical form.
    """
    Mx = as_matrix(M)
    if not is_exact(Mx):
        raise NotationError(
            "an incommensurate (irrational) matrix has no exact canonical form; give rational entries."
        )
    den = common_denominator(Mx)
    N = [int(v * den) for v in Mx.ravel()]
    h11, h12, h22 = hnf_ints(*N)
    if den == 1:
        return np.array([[h11, h12], [0, h22]], dtype=np.int64)
    out = np.empty((2, 2), dtype=object)
    out[:] = [[Fraction(h11, den), Fraction(h12, den)], [Fraction(0), Fraction(h22, den)]]
    return out


def equivalent(M1, M2, tol: float = 1e-6) -> bool:
    """True when ``M1`` and ``M2`` describe the same superlattice (``M2 = U M1``, U in GL(2,Z)).

    Exact for rational matrices; with absolute tolerance ``tol`` on the entries of
    ``U = M2 M1^-1`` when either matrix is irrational.
    """
    A, B = as_matrix(M1), as_matrix(M2)
    if is_exact(A) and is_exact(B):
        U = B @ inv2(A)
        return all(v.denominator == 1 for v in U.flat) and abs(det2(U)) == 1
    U = to_float(B) @ np.linalg.inv(to_float(A))
    if np.max(np.abs(U - np.rint(U))) > tol:
        return False
    return abs(abs(round(float(np.linalg.det(np.rint(U))))) - 1) == 0


def _integer_matrix(M) -> np.ndarray:
    Mx = as_matrix(M)
    if not is_exact(Mx) or any(v.denominator != 1 for v in Mx.flat):
        raise NotationError(f"an integer matrix is needed here, got {Mx.tolist()}.")
    return np.array([[int(v) for v in row] for row in Mx], dtype=object)
