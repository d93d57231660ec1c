"""Symmetry domains: the distinct superlattices that the substrate point group makes of one.

Convention. A substrate point operation is an integer matrix W in the substrate basis with
``W A = A R^T`` (R the Cartesian rotation or mirror, see
:class:`surfgeo.lattice.PointOperation`). Applying R to the superlattice B = M A gives
``B' = B R^T = M A R^T = M W A``, so the rotated or mirrored superlattice has the matrix
``M W``. It is the same superlattice as M exactly when ``M W M^-1`` lies in GL(2, Z); those W
form the stabiliser S. The domains correspond to the cosets ``S W`` and their number is
``|G| / |S|`` (orbit-stabiliser theorem).

Integer and rational matrices are handled in exact integer arithmetic (a rational M is
scaled to an integer matrix N = d M; ``N W N^-1 = M W M^-1``). Incommensurate (float)
matrices are compared with a tolerance.

References
----------
.. [1] K. Hermann, *Crystallography and Surface Structure*, Wiley-VCH (2011), sec. 6
   (superstructure domains).
"""

from __future__ import annotations

import weakref
from dataclasses import dataclass
from fractions import Fraction

import numpy as np

from surfgeo.lattice.hnf import hermite_normal_forms, hnf_ints
from surfgeo.lattice.lattice2d import Lattice2D, PointOperation
from surfgeo.lattice.rational import as_matrix, common_denominator, is_exact, to_float

#: Tolerance on the entries of M W M^-1 for incommensurate (float) matrices.
FLOAT_TOL = 1e-6

_GROUP_CACHE: weakref.WeakKeyDictionary = weakref.WeakKeyDictionary()


def _group(lattice: Lattice2D) -> tuple[list[PointOperation], list[tuple[int, int, int, int]]]:
    entry = _GROUP_CACHE.get(lattice)
    if entry is None:
        ops = lattice.point_group()
        entry = (ops, _int_ops(ops))
        _GROUP_CACHE[lattice] = entry
    return entry


def point_group_of(lattice: Lattice2D) -> list[PointOperation]:
    """``lattice.point_group()``, computed once per lattice object and cached."""
    return list(_group(lattice)[0])


@dataclass(frozen=True, eq=False)
class Domain:
    """One symmetry domain of a superstructure.

    Attributes
    ----------
    matrix : ndarray, shape (2, 2)
        ``M W`` for the first operation W (in the order of the point group) that produces
        this domain: exact Fractions (``object`` array) for rational M, floats otherwise.
        For a mirror W its determinant has the opposite sign of det M (a left-handed basis of
        the mirrored superlattice).
    operations : tuple of PointOperation
        All substrate operations that produce this domain from M (a coset of the stabiliser).
        The first domain is M itself, produced by the identity and the rest of the
        stabiliser.
    """

    matrix: np.ndarray
    operations: tuple[PointOperation, ...]

    @property
    def symbols(self) -> list[str]:
        """Short names of the operations, e.g. ``['3+', 'm(30)']``."""
        return [op.symbol for op in self.operations]

    def to_dict(self) -> dict:
        from surfgeo.lattice.rational import to_plain

        return {"matrix": to_plain(self.matrix), "operations": self.symbols}

    def __repr__(self) -> str:
        from surfgeo.lattice.rational import format_matrix

        return f"Domain({format_matrix(self.matrix)}, ops={self.symbols})"


def _int_ops(ops: list[PointOperation]) -> list[tuple[int, int, int, int]]:
    return [tuple(int(v) for v in op.integer.ravel()) for op in ops]


def _stabiliser_int(N: tuple[int, int, int, int], wops: list[tuple[int, int, int, int]]) -> list[int]:
    a, b, c, d = N
    det = a * d - b * c
    out = []
    for i, (w11, w12, w21, w22) in enumerate(wops):
        # X = N W adj(N), adj(N) = [[d, -b], [-c, a]]; N W N^-1 integer iff X == 0 mod det
        p11, p12 = a * w11 + b * w21, a * w12 + b * w22
        p21, p22 = c * w11 + d * w21, c * w12 + d * w22
        if (
            (p11 * d - p12 * c) % det == 0
            and (-p11 * b + p12 * a) % det == 0
            and (p21 * d - p22 * c) % det == 0
            and (-p21 * b + p22 * a) % det == 0
        ):
            out.append(i)
    return out


def _stabiliser_float(Mf: np.ndarray, ops: list[PointOperation]) -> list[int]:
    W = np.array([op.integer for op in ops], dtype=float)
    X = np.einsum("ij,njk,kl->nil", Mf, W, np.linalg.inv(Mf))
    ok = np.all(np.abs(X - np.rint(X)) <= FLOAT_TOL * np.maximum(1.0, np.abs(X)), axis=(1, 2))
    return [int(i) for i in np.nonzero(ok)[0]]


def _cosets(stab: list[int], wops: list[tuple[int, int, int, int]]) -> list[list[int]]:
    index = {w: i for i, w in enumerate(wops)}
    assigned = [False] * len(wops)
    cosets = []
    for i, (w11, w12, w21, w22) in enumerate(wops):
        if assigned[i]:
            continue
        members = []
        for s in stab:
            s11, s12, s21, s22 = wops[s]
            prod = (s11 * w11 + s12 * w21, s11 * w12 + s12 * w22,
                    s21 * w11 + s22 * w21, s21 * w12 + s22 * w22)
            j = index[prod]
            if not assigned[j]:
                assigned[j] = True
                members.append(j)
        cosets.append(sorted(members))
    return cosets


def stabiliser(lattice: Lattice2D, M) -> list[PointOperation]:
    """The substrate operations W that map the superlattice of M onto itself
    (``M W M^-1`` in GL(2, Z))."""
    Mx = as_matrix(M)
    ops, wops = _group(lattice)
    if is_exact(Mx):
        den = common_denominator(Mx)
        N = tuple(int(v * den) for v in Mx.ravel())
        idx = _stabiliser_int(N, wops)
    else:
        idx = _stabiliser_float(to_float(Mx), ops)
    return [ops[i] for i in idx]


def symmetry_domains(lattice: Lattice2D, M, operations: list[PointOperation] | None = None) -> list[Domain]:
    """The symmetry domains of the superstructure M on ``lattice``.

    Parameters
    ----------
    lattice : Lattice2D
        The substrate; its holohedral point group is used (cached per lattice object).
    M : array_like, shape (2, 2)
        Superstructure matrix (B = M A); exact where rational.
    operations : list of PointOperation, optional
        Use this group instead of the holohedry (for instance the point group of a
        substrate whose symmetry is lower than that of its lattice). It must be a group and
        contain the identity first.

    Returns
    -------
    list of Domain
        The first is M itself (identity). ``len(result) == |G| / |stabiliser|``.

    Examples
    --------
    >>> from surfgeo.lattice import parse_lattice
    >>> len(symmetry_domains(parse_lattice("hex:2.77"), [[2, 0], [0, 1]]))
    3
    """
    Mx = as_matrix(M)
    if operations is not None:
        ops = list(operations)
        wops = _int_ops(ops)
    else:
        ops, wops = _group(lattice)
    exact = is_exact(Mx)
    if exact:
        den = common_denominator(Mx)
        N = tuple(int(v * den) for v in Mx.ravel())
        stab = _stabiliser_int(N, wops)
    else:
        Mf = to_float(Mx)
        stab = _stabiliser_float(Mf, ops)
    out = []
    for coset in _cosets(stab, wops):
        w = wops[coset[0]]
        if exact:
            # integer products, one division by the common denominator at the end
            n11, n12, n21, n22 = N
            prod = (n11 * w[0] + n12 * w[2], n11 * w[1] + n12 * w[3],
                    n21 * w[0] + n22 * w[2], n21 * w[1] + n22 * w[3])
            mat = np.empty((2, 2), dtype=object)
            vals = [Fraction(v) for v in prod] if den == 1 else [Fraction(v, den) for v in prod]
            mat[0, 0], mat[0, 1], mat[1, 0], mat[1, 1] = vals
        else:
            mat = Mf @ np.array(w, dtype=float).reshape(2, 2)
        out.append(Domain(mat, tuple(ops[j] for j in coset)))
    return out


def distinct_superlattices(lattice: Lattice2D, n: int) -> list[tuple[np.ndarray, int]]:
    """One representative of every superlattice of area ``n`` up to the substrate point group.

    Returns
    -------
    list of (H, n_domains)
        H is the Hermite normal form (int64) of the representative, the first in the order of
        :func:`~surfgeo.lattice.hnf.hermite_normal_forms` among its domains; ``n_domains`` is
        the size of its orbit. The orbit sizes add up to sigma(n).
    """
    _, wops = _group(lattice)
    seen: set[tuple[int, int, int]] = set()
    out = []
    for H in hermite_normal_forms(n):
        key = (int(H[0, 0]), int(H[0, 1]), int(H[1, 1]))
        if key in seen:
            continue
        a, b, d = key
        orbit = set()
        for w11, w12, w21, w22 in wops:
            orbit.add(hnf_ints(a * w11 + b * w21, a * w12 + b * w22, d * w21, d * w22))
        seen |= orbit
        out.append((H, len(orbit)))
    return out
