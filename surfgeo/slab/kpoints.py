"""Monkhorst-Pack k-point meshes for slabs from a k-point spacing.

The rule is the one most plane-wave codes use for an automatic mesh: along each in-plane
reciprocal vector ``b_i`` (including the factor 2 pi, so ``a_i . b_j = 2 pi delta_ij``)
take ``N_i = max(1, ceil(|b_i| / spacing))`` points, and a single point along the surface
normal, where a slab with vacuum has no dispersion.

The in-plane reciprocal vectors are those of the 2D surface lattice spanned by the first
two cell vectors. When the third cell vector is along the surface normal they equal the
first two reciprocal vectors of the 3D cell; when it is tilted, the 3D vectors pick up a
component along the normal that does not sample the surface Brillouin zone, and the 2D
lengths used here are the meaningful ones (a code that applies the rule to the 3D vectors,
such as an automatic ``KSPACING`` in some codes, may then give a slightly denser mesh).

A mesh from this rule is a starting point: converge the k-point sampling yourself.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from surfgeo.checks import positive_number
from surfgeo.errors import InputError, StructureError

#: Default k-point spacing in 1/Angstrom (2 pi included), a common choice for metal slabs
#: before a convergence test.
DEFAULT_KSPACING = 0.25

#: Largest number of k-points along one reciprocal vector that a spacing may ask for; a
#: denser mesh means a spacing typed in the wrong units (or a slip of the finger).
MAX_KPOINTS_PER_AXIS = 1000


@dataclass(frozen=True)
class KPointMesh:
    """A Monkhorst-Pack mesh chosen from a k-point spacing.

    Attributes
    ----------
    mesh : tuple of int
        ``(N1, N2, 1)``: points along b1, b2 and the surface normal.
    spacing : float
        The requested largest spacing between k-points, 1/Angstrom (2 pi included).
    reciprocal_lengths : tuple of float
        ``|b1|, |b2|`` of the in-plane reciprocal lattice, 1/Angstrom (2 pi included).
    achieved_spacing : tuple of float
        ``|b_i| / N_i``, the actual spacing along b1 and b2 (never above ``spacing``).
    """

    mesh: tuple[int, int, int]
    spacing: float
    reciprocal_lengths: tuple[float, float]
    achieved_spacing: tuple[float, float]

    def to_dict(self) -> dict:
        return {
            "mesh": list(self.mesh),
            "spacing": self.spacing,
            "reciprocal_lengths": list(self.reciprocal_lengths),
            "achieved_spacing": list(self.achieved_spacing),
            "rule": "N_i = max(1, ceil(|b_i| / spacing)) with |b_i| including 2 pi; 1 along the normal",
        }


def surface_reciprocal(cell) -> np.ndarray:
    """In-plane reciprocal vectors (rows, 1/Angstrom, 2 pi included) of a slab cell.

    Parameters
    ----------
    cell : array_like, shape (3, 3) or (2, 2) or (2, 3)
        Cell vectors as rows; only the first two rows (the surface lattice) are used.

    Returns
    -------
    ndarray, shape (2, 3)
        ``b1, b2`` in Cartesian coordinates, lying in the plane of ``a1, a2``, with
        ``a_i . b_j = 2 pi delta_ij``.
    """
    c = np.asarray(cell, dtype=float)
    if c.ndim != 2 or c.shape[0] < 2 or c.shape[1] not in (2, 3):
        raise StructureError(f"a cell must have at least two rows of 2 or 3 numbers, got shape {c.shape}.")
    a = np.zeros((2, 3))
    a[:, : c.shape[1]] = c[:2]
    gram = a @ a.T
    if abs(np.linalg.det(gram)) <= 1e-12 * np.prod(np.diag(gram)) or np.any(np.diag(gram) <= 0):
        raise StructureError("the first two cell vectors are parallel or zero; they do not span a surface.")
    # b_i = 2 pi sum_j (G^-1)_ij a_j lies in the plane and satisfies a . b = 2 pi 1.
    return 2.0 * math.pi * np.linalg.solve(gram, a)


def kpoint_mesh(cell, spacing: float = DEFAULT_KSPACING) -> KPointMesh:
    """The k-point mesh of a slab for a largest k-point spacing.

    Parameters
    ----------
    cell : array_like, shape (3, 3)
        Slab cell (rows a1, a2, c), Angstrom; a1 and a2 span the surface.
    spacing : float
        Largest allowed distance between neighbouring k-points along b1 and b2, in
        1/Angstrom with the 2 pi included (so 0.25 1/A corresponds to 0.04 in units of
        2 pi/A).

    Returns
    -------
    KPointMesh

    Notes
    -----
    ``N_i = max(1, ceil(|b_i| / spacing))`` for i = 1, 2 and ``N_3 = 1`` (the surface
    normal). Convergence of the sampling is the user's responsibility.

    Examples
    --------
    >>> import numpy as np
    >>> kpoint_mesh(np.diag([2.0, 2.0, 20.0]), 0.5).mesh  # |b| = pi
    (7, 7, 1)
    """
    s = positive_number(spacing, "the k-point spacing", "number", "1/Angstrom")
    b = surface_reciprocal(cell)
    lengths = np.linalg.norm(b, axis=1)
    ratio = lengths / s
    if np.any(ratio > MAX_KPOINTS_PER_AXIS):
        raise InputError(
            f"the k-point spacing {s:g} 1/Angstrom asks for more than {MAX_KPOINTS_PER_AXIS} points along "
            f"a reciprocal vector of {lengths.max():.3f} 1/Angstrom; give a spacing such as 0.1 to 0.3 "
            "(2 pi included)."
        )
    n = np.maximum(1, np.ceil(ratio)).astype(int)
    return KPointMesh(
        mesh=(int(n[0]), int(n[1]), 1),
        spacing=s,
        reciprocal_lengths=(float(lengths[0]), float(lengths[1])),
        achieved_spacing=(float(lengths[0] / n[0]), float(lengths[1] / n[1])),
    )


__all__ = ["DEFAULT_KSPACING", "MAX_KPOINTS_PER_AXIS", "KPointMesh", "kpoint_mesh", "surface_reciprocal"]
