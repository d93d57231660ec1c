"""Which rotated and mirrored copies of a slab are distinct domains, and which ones exist.

A superstructure on a substrate of point group G grows in every orientation the substrate
allows, so the pattern is the incoherent sum over the images of the structure under G. The
*lattice* domains (:func:`surfgeo.lattice.symmetry_domains`) only look at the superlattice;
the atoms may have lower symmetry than their lattice (a motif without a mirror, an fcc(111)
substrate whose point group 3m is half of the 6mm of its lattice). This module finds, from
the atoms themselves,

* the substrate group: the operations of the lattice holohedry that map the deepest layers of
  the slab (taken as bulk, 1x1 periodic) onto themselves; only these produce domains that
  exist on a single crystal;
* the stabiliser of the structure: the operations that map the whole slab onto itself;

so that each distinct structural domain is computed once (one representative per coset of
the stabiliser in the substrate group).

All checks allow a translation (a symmetry operation need not pass through the origin of the
cell) and compare atoms of the same element modulo the 2D lattice within a tolerance ``tol``
(Angstrom).
"""

from __future__ import annotations

import numpy as np
from scipy.spatial import cKDTree

#: Default tolerance (Angstrom) for structural symmetry checks.
SYMPREC = 0.05

#: Thickness (Angstrom) of the bottom slice of a slab taken as bulk substrate.
SUBSTRATE_DEPTH = 4.0


def maps_onto_itself(positions, numbers, rotation, cell2d, tol: float = SYMPREC) -> bool:
    """True if ``rotation`` (plus some in-plane translation) maps the structure onto itself.

    Parameters
    ----------
    positions : array_like, shape (N, 3)
        Cartesian positions, Angstrom (in-plane periodic with ``cell2d``).
    numbers : array_like of int, shape (N,)
        Atomic numbers; only atoms of the same element may be matched.
    rotation : array_like, shape (2, 2)
        Cartesian in-plane operation acting on column vectors (z is left unchanged).
    cell2d : array_like, shape (2, 2)
        Rows of the in-plane lattice of the structure, Angstrom.
    tol : float
        Largest allowed distance between an image and its partner, Angstrom.
    """
    pos = np.asarray(positions, dtype=float)
    num = np.asarray(numbers, dtype=np.int64)
    n = len(pos)
    if n == 0:
        return True
    cell = np.asarray(cell2d, dtype=float)
    inv = np.linalg.inv(cell)
    R = np.asarray(rotation, dtype=float)
    rot = pos.copy()
    rot[:, :2] = pos[:, :2] @ R.T

    def frac(p):
        f = (p[:, :2] @ inv) % 1.0
        return np.where(f >= 1.0, 0.0, f)  # -1e-18 % 1.0 rounds to 1.0, outside the periodic box

    # search space: fractional x, y (periodic), z and the element (far apart), all in one tree
    zscale = 1.0 / max(float(np.min(np.linalg.norm(cell, axis=1))), 1e-9)
    span = 1e6
    key = np.column_stack([frac(pos), pos[:, 2] * zscale + span / 2, num * 10.0 + span / 4])
    tree = cKDTree(key, boxsize=[1.0, 1.0, span * 2, span * 2])

    def match(points: np.ndarray, elements: np.ndarray) -> np.ndarray:
        q = np.column_stack([frac(points), points[:, 2] * zscale + span / 2, elements * 10.0 + span / 4])
        _, idx = tree.query(q, k=1)
        d = points[:, :2] - pos[idx, :2]
        df = d @ inv
        d = (df - np.rint(df)) @ cell
        dist = np.sqrt(np.einsum("ij,ij->i", d, d) + (points[:, 2] - pos[idx, 2]) ** 2)
        return (dist <= tol) & (num[idx] == elements)

    # anchor: an atom of the rarest element; candidate shifts send its image onto partners
    elements, counts = np.unique(num, return_counts=True)
    rare = elements[np.argmin(counts)]
    anchor = np.flatnonzero(num == rare)[0]
    partners = np.flatnonzero((num == rare) & (np.abs(pos[:, 2] - pos[anchor, 2]) <= tol))
    shifts = pos[partners, :2] - rot[anchor, :2]
    # cheap screening on a few atoms, then the full check for the survivors
    rng = np.random.default_rng(0)
    probe = rng.choice(n, size=min(n, 16), replace=False)
    for t in shifts:
        moved = rot[probe].copy()
        moved[:, :2] += t
        if not match(moved, num[probe]).all():
            continue
        moved = rot.copy()
        moved[:, :2] += t
        if match(moved, num).all():
            return True
    return False


def substrate_operations(
    positions, numbers, operations, surface_cell, tol: float = SYMPREC, depth: float = SUBSTRATE_DEPTH
) -> list[bool]:
    """Which lattice operations are symmetries of the substrate (the bottom ``depth`` Angstrom).

    The bottom slice is assumed to be bulk-like and periodic with the 1x1 ``surface_cell``.
    """
    pos = np.asarray(positions, dtype=float)
    num = np.asarray(numbers)
    if len(pos) == 0:
        return [True] * len(operations)
    bottom = pos[:, 2] <= pos[:, 2].min() + depth
    return [maps_onto_itself(pos[bottom], num[bottom], op.cartesian, surface_cell, tol) for op in operations]


def coset_representatives(operations, stabiliser) -> list[list[int]]:
    """Group operations into cosets ``o S`` of the stabiliser; returns index lists per coset.

    Two operations give the same structure exactly when ``o1^-1 o2`` lies in the stabiliser.
    """
    S = [np.asarray(s.cartesian) for s in stabiliser]
    groups: list[list[int]] = []
    for i, op in enumerate(operations):
        for grp in groups:
            rel = np.asarray(operations[grp[0]].cartesian).T @ np.asarray(op.cartesian)
            if any(np.allclose(rel, s, atol=1e-6) for s in S):
                grp.append(i)
                break
        else:
            groups.append([i])
    return groups
