"""Diffraction beams: enumeration inside the emergence condition and exact beam labels.

A beam is labelled by ``(h, k)`` in the reciprocal basis of the substrate 1x1 lattice
(``Lattice2D.reciprocal``, 2 pi included): ``g = h b1 + k b2``. Labels are exact
:class:`fractions.Fraction` values whenever the superstructure matrix is rational, so that
integer-order and fractional-order beams are told apart exactly.

For a superstructure matrix ``M`` (Park and Madden, ``B = M A``) the superlattice reciprocal
basis is ``B* = M^-T A*``; the superlattice beam ``(m, n)`` therefore has the substrate label
``(h, k) = (m, n) M^-T``. Internally exact labels are kept as integer numerators over one
common denominator (vectorised numpy integer arithmetic); :class:`~fractions.Fraction` objects
are made only for output.
"""

from __future__ import annotations

import math
from fractions import Fraction

import numpy as np

from surfgeo.errors import InputError, NotationError

#: Largest denominator accepted when a float matrix entry is recognised as a rational number
#: (as for decimals in :mod:`surfgeo.lattice.rational`); larger ones stay floats.
MAX_DENOMINATOR = 12


def reciprocal_points_in_disc(reciprocal, centre, radius: float) -> np.ndarray:
    """Integer index pairs ``(m, n)`` with ``|centre + m b1 + n b2| < radius``.

    Parameters
    ----------
    reciprocal : array_like, shape (2, 2)
        Rows b1, b2 of a reciprocal basis, 1/Angstrom.
    centre : array_like, shape (2,)
        Centre of the disc (e.g. the incident parallel momentum), 1/Angstrom.
    radius : float
        Radius of the disc (e.g. the wavenumber k), 1/Angstrom.

    Returns
    -------
    ndarray of int64, shape (n, 2)
        Index pairs sorted by distance from the disc centre, then by index.
    """
    b = np.asarray(reciprocal, dtype=float)
    c = np.asarray(centre, dtype=float)
    # m = (g . a1) / (2 pi) with a the direct basis: bound |m| by the disc's extent along a1
    a = 2.0 * math.pi * np.linalg.inv(b).T
    na = np.linalg.norm(a, axis=1) / (2.0 * math.pi)
    c_idx = np.linalg.solve(b.T, c)  # centre in index coordinates
    lo = np.floor(-c_idx - radius * na).astype(np.int64) - 1
    hi = np.ceil(-c_idx + radius * na).astype(np.int64) + 1
    m, n = np.meshgrid(np.arange(lo[0], hi[0] + 1), np.arange(lo[1], hi[1] + 1), indexing="ij")
    mn = np.stack([m.ravel(), n.ravel()], axis=1)
    d = c + mn @ b
    r2 = np.einsum("ij,ij->i", d, d)
    keep = r2 < radius * radius
    mn, r2 = mn[keep], r2[keep]
    order = np.lexsort((mn[:, 1], mn[:, 0], np.round(r2, 9)))
    return mn[order]


def _to_fraction(x) -> Fraction | None:
    if isinstance(x, Fraction):
        return x
    if isinstance(x, (int, np.integer)):
        return Fraction(int(x))
    try:
        f = float(x)
    except (TypeError, ValueError):
        return None
    if not math.isfinite(f):
        return None
    fr = Fraction(f).limit_denominator(MAX_DENOMINATOR)
    return fr if abs(float(fr) - f) <= 1e-12 * max(1.0, abs(f)) else None


def rational_matrix(matrix) -> np.ndarray | None:
    """The 2x2 matrix as an object array of :class:`Fraction`, or None if an entry is irrational.

    Integers and Fractions are taken as they are; a float is accepted as rational only when a
    fraction with denominator up to :data:`MAX_DENOMINATOR` equals it to 1e-12.
    """
    arr = np.asarray(matrix, dtype=object)
    if arr.shape != (2, 2):
        raise NotationError(f"a superstructure matrix has 2x2 entries, got shape {arr.shape}.")
    out = np.empty((2, 2), dtype=object)
    for idx in np.ndindex(2, 2):
        fr = _to_fraction(arr[idx])
        if fr is None:
            return None
        out[idx] = fr
    return out


def float_matrix(matrix) -> np.ndarray:
    """The 2x2 matrix as floats; raise :class:`NotationError` if it is singular or malformed."""
    try:
        m = np.array(np.asarray(matrix, dtype=object).tolist(), dtype=float)
    except (TypeError, ValueError):
        raise NotationError("the superstructure matrix must hold four numbers.") from None
    if m.shape != (2, 2) or not np.all(np.isfinite(m)):
        raise NotationError(f"the superstructure matrix must be 2x2 finite numbers, got {matrix!r}.")
    if abs(np.linalg.det(m)) < 1e-9:
        raise NotationError("the superstructure matrix is singular (determinant 0); give a 2D cell.")
    return m


def integer_form(matrix_frac) -> tuple[np.ndarray, int]:
    """Write a rational matrix as ``N / D`` with integer N (int64 2x2) and the common denominator D."""
    D = 1
    for x in np.asarray(matrix_frac, dtype=object).ravel():
        D = D * x.denominator // math.gcd(D, x.denominator)
    N = np.array([[int(x * D) for x in row] for row in matrix_frac], dtype=np.int64)
    return N, D


def label_numerators(mn, matrix_frac) -> tuple[np.ndarray, int]:
    """Exact substrate labels ``(m, n) M^-T`` of superlattice beams as integer numerators.

    Parameters
    ----------
    mn : array_like of int, shape (n, 2)
        Superlattice beam indices.
    matrix_frac : array of Fraction, shape (2, 2)
        The superstructure matrix (see :func:`rational_matrix`).

    Returns
    -------
    num : ndarray of int64, shape (n, 2)
        Label numerators.
    den : int
        The common positive denominator: labels are ``num / den`` (not reduced).
    """
    N, D = integer_form(matrix_frac)
    det = int(N[0, 0] * N[1, 1] - N[0, 1] * N[1, 0])
    if det == 0:
        raise NotationError("the superstructure matrix is singular (determinant 0); give a 2D cell.")
    adj = np.array([[N[1, 1], -N[0, 1]], [-N[1, 0], N[0, 0]]], dtype=np.int64)
    # M^-1 = D adj(N) / det(N); labels = mn @ M^-T = mn @ (D adj^T) / det
    num = np.asarray(mn, dtype=np.int64) @ (D * adj.T)
    if det < 0:
        num, det = -num, -det
    return num, det


def format_index(x) -> str:
    """A beam index as a string: ``"1/2"``, ``"-1"``, ``"0"``; floats (incommensurate) as ``"0.4226"``."""
    if isinstance(x, Fraction):
        return str(x)
    if isinstance(x, (int, np.integer)):
        return str(int(x))
    return f"{float(x):.4f}"


def parse_index(text: str) -> Fraction:
    """Parse a beam index such as ``"1/2"``, ``"-3/2"`` or ``"2"`` into a :class:`Fraction`."""
    try:
        return Fraction(str(text).strip())
    except (ValueError, ZeroDivisionError):
        raise InputError(f"beam index {text!r} is not a number or fraction such as 1/2.") from None


def is_integer_index(x) -> bool:
    """True when ``x`` is exactly an integer (Fractions and ints; floats are never exact)."""
    if isinstance(x, (int, np.integer)):
        return True
    if isinstance(x, Fraction):
        return x.denominator == 1
    return False


def terrace_indices(k_parallel, energy_eV, incidence, terrace_vectors) -> np.ndarray:
    """Beam positions relative to the terrace lattice of a stepped (vicinal) face.

    The momentum transfer ``q = k_out - k_in`` (vacuum) of each beam is projected onto the
    terrace plane and expressed in the terrace reciprocal basis: ``(h_t, k_t) = (q . t1,
    q . t2) / 2 pi`` with ``t1, t2`` the terrace lattice vectors. A beam with integer
    ``(h_t, k_t)`` satisfies the Laue condition of the terraces: at the in-phase energies the
    intensity near the terrace specular direction is concentrated in the beam with
    ``(h_t, k_t) = (0, 0)``; at the out-of-phase energies the two beams either side have
    ``h_t`` near +-1/2 along the step-down direction. These indices depend on the energy.

    Parameters
    ----------
    k_parallel : array_like, shape (n, 2)
        Parallel momentum of the beams on the vicinal surface, 1/Angstrom (sample frame).
    energy_eV : float
        Energy in eV.
    incidence : (float, float)
        Polar angle and azimuth (from +x) of the incident beam, degrees.
    terrace_vectors : array_like, shape (2, 3)
        Two lattice vectors of the terrace plane (Cartesian, Angstrom, sample frame).

    Returns
    -------
    ndarray, shape (n, 2)
        Terrace indices (floats); NaN for beams that do not emerge.

    References
    ----------
    .. [1] M. Henzler, Surf. Sci. 19, 159 (1970): LEED from regular step arrays.
    """
    from surfgeo.diffraction.electron import exit_directions, incident_k_parallel, wavenumber

    t = np.asarray(terrace_vectors, dtype=float)
    if t.shape != (2, 3):
        raise InputError(f"terrace vectors must be two 3D vectors, got shape {t.shape}.")
    k = wavenumber(energy_eV)
    kin_par = incident_k_parallel(energy_eV, incidence)
    kin = np.array([kin_par[0], kin_par[1], -math.sqrt(max(k * k - kin_par @ kin_par, 0.0))])
    kout = k * exit_directions(k_parallel, energy_eV)
    q = kout - kin
    return (q @ t.T) / (2.0 * math.pi)
