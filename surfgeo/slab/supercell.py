"""Superstructure cells of a slab, with a map from every atom back to its 1x1 origin.

A superstructure is given by an integer matrix M relative to the substrate's 1x1 surface
cell A (Park and Madden, B = M @ A, rows), or by Wood notation that the notation module
turns into such a matrix. :func:`make_supercell` tiles the slab into the cell B in the same
Cartesian frame: the substrate keeps a1 along +x, +z still points into the vacuum, and the
cell rows become b1, b2 (for a rotated superstructure such as (sqrt3 x sqrt3)R30 the cell row
b1 is therefore not along +x; the substrate lattice is, and ``surface_cell`` stays valid).

Two per-atom arrays tie every atom to the 1x1 cell it came from:

``surfgeo_origin`` (int)
    index of the atom in the 1x1 slab;
``surfgeo_cell_shift`` (int, shape (N, 2))
    the 1x1 lattice translation (n1, n2): position = origin position + n1 a1 + n2 a2 (as long
    as no reconstruction has moved the atom since).

The record ``atoms.info["surfgeo"]`` gets the new ``supercell_matrix`` and a provenance line.

References
----------
.. [1] R. L. Park and H. H. Madden, "Annealing changes on the (100) surface of palladium and
   their effect on the adsorption of oxygen", Surf. Sci. 11, 188 (1968) (matrix notation).
.. [2] E. A. Wood, "Vocabulary of surface crystallography", J. Appl. Phys. 35, 1306 (1964).
"""

from __future__ import annotations

import numpy as np

from surfgeo.errors import NotationError, StructureError
from surfgeo.slab.info import SurfaceInfo, set_surface_info, surface_info

#: Per-atom array: index of the atom in the 1x1 slab.
ORIGIN_KEY = "surfgeo_origin"
#: Per-atom array: 1x1 lattice translation (n1, n2) of the atom relative to its origin.
SHIFT_KEY = "surfgeo_cell_shift"
#: Per-atom array: adsorbate molecule number (0 = not an adsorbate), see surfgeo.slab.adsorbates.
ADSORBATE_KEY = "surfgeo_adsorbate"
#: Per-atom array: overlayer film number (0 = substrate or adsorbate), see surfgeo.slab.overlayer.
SUBLATTICE_KEY = "surfgeo_sublattice"


def copy_slab(atoms):
    """A copy of a slab whose ``info`` (including the surfgeo record) is an independent copy."""
    import copy

    new = atoms.copy()
    new.info = copy.deepcopy(atoms.info)
    return new


def slab_cell2d(atoms) -> np.ndarray:
    """The in-plane cell rows (2x2, Angstrom) of a slab, checking the slab convention."""
    cell = np.asarray(atoms.cell[:], dtype=float)
    if np.any(np.abs(cell[:2, 2]) > 1e-6):
        raise StructureError(
            "the first two cell vectors of a slab must lie in the xy-plane (z = 0); "
            "this cell has z components in a1 or a2."
        )
    A = cell[:2, :2]
    if abs(np.linalg.det(A)) < 1e-8:
        raise StructureError("the in-plane cell vectors of the slab are parallel or zero.")
    return A


def as_matrix(spec, lattice=None, field: str = "superstructure") -> np.ndarray:
    """A 2x2 integer superstructure matrix from a matrix or a Wood notation string.

    Parameters
    ----------
    spec : array_like or str
        ``[[m11, m12], [m21, m22]]`` (B = M @ A) or Wood notation such as ``"p(2x2)"`` or
        ``"(sqrt3 x sqrt3)R30"`` (needs ``lattice``).
    lattice : Lattice2D, optional
        The 1x1 substrate lattice, needed for Wood notation.
    field : str
        Name used in error messages.

    Returns
    -------
    ndarray of int, shape (2, 2)
        With a positive determinant (a1 x a2 along +z is kept).
    """
    if isinstance(spec, str):
        if lattice is None:
            raise NotationError(f"{field}: Wood notation {spec!r} needs the substrate lattice.")
        from surfgeo.lattice.wood import wood_to_matrix

        try:
            m = np.array(wood_to_matrix(lattice, spec), dtype=float)
        except NotationError as exc:
            raise NotationError(f"{field}: {exc}") from None
        if np.any(np.abs(m - np.rint(m)) > 1e-9):
            raise NotationError(
                f"{field} {spec!r} is not commensurate with the substrate (matrix "
                f"{np.round(m, 4).tolist()}); a supercell needs an integer matrix."
            )
    else:
        m = getattr(spec, "matrix", spec)
        try:
            m = np.array(m, dtype=float)
        except (TypeError, ValueError):
            raise NotationError(f"{field} must be a 2x2 list of integers or Wood notation.") from None
    if m.shape != (2, 2) or not np.all(np.isfinite(m)):
        raise NotationError(f"{field} must be a 2x2 list of integers, got shape {m.shape}.")
    if np.any(np.abs(m - np.rint(m)) > 1e-9):
        raise NotationError(f"{field} must contain integers only, got {m.tolist()}.")
    m = np.rint(m).astype(int)
    det = round(float(np.linalg.det(m)))
    if det == 0:
        raise NotationError(f"{field} {m.tolist()} is singular; its rows must span a 2D cell.")
    if det < 0:
        raise NotationError(
            f"{field} {m.tolist()} has a negative determinant (a left-handed cell); swap its rows "
            "or change the sign of one row so that b1 x b2 points along +z."
        )
    return m


def lattice_points_in_cell(R: np.ndarray) -> np.ndarray:
    """Integer vectors n with n @ inv(R) in [0, 1)^2: one per cell of the sublattice R.

    Parameters
    ----------
    R : ndarray of int, shape (2, 2)
        Superlattice in units of the lattice, rows (B = R @ A).

    Returns
    -------
    ndarray of int, shape (|det R|, 2), sorted lexicographically.
    """
    R = np.asarray(R, dtype=float)
    corners = np.array([[0, 0], [1, 0], [0, 1], [1, 1]], dtype=float) @ R
    lo = np.floor(corners.min(axis=0)).astype(int)
    hi = np.ceil(corners.max(axis=0)).astype(int)
    g1, g2 = np.meshgrid(np.arange(lo[0], hi[0] + 1), np.arange(lo[1], hi[1] + 1), indexing="ij")
    n = np.column_stack([g1.ravel(), g2.ravel()])
    f = n @ np.linalg.inv(R)
    eps = 1e-9
    keep = np.all((f >= -eps) & (f < 1 - eps), axis=1)
    n = n[keep]
    det = abs(round(float(np.linalg.det(R))))
    if len(n) != det:  # pragma: no cover - exact arithmetic on small integers
        raise StructureError(f"internal error: found {len(n)} lattice points for a cell of index {det}.")
    return n[np.lexsort((n[:, 1], n[:, 0]))]


def origin_map(atoms) -> tuple[np.ndarray, np.ndarray]:
    """Index of each atom in the 1x1 slab and its 1x1 lattice translation (n1, n2).

    A slab that was never tiled maps every atom onto itself with zero translation.
    """
    n = len(atoms)
    origin = atoms.arrays.get(ORIGIN_KEY)
    shift = atoms.arrays.get(SHIFT_KEY)
    origin = np.arange(n) if origin is None else np.asarray(origin, dtype=int)
    shift = np.zeros((n, 2), dtype=int) if shift is None else np.asarray(shift, dtype=int).reshape(n, 2)
    return origin, shift


def make_supercell(atoms, matrix, wrap: bool = True):
    """Tile a slab into the superstructure cell B = M @ A of its 1x1 surface cell A.

    Parameters
    ----------
    atoms : ase.Atoms
        A slab (a1, a2 in the xy-plane, +z into the vacuum). Its record
        ``info["surfgeo"]`` gives the 1x1 cell A and the current matrix C of its cell
        (identity for a 1x1 slab); without a record the cell is taken as 1x1.
    matrix : array_like of int (2, 2) or str
        M relative to the 1x1 cell, or Wood notation (``"p(2x2)"``, ``"c(2x2)"``,
        ``"(sqrt3 x sqrt3)R30"``). The new cell must be a superlattice of the current one
        (M @ inv(C) integer).
    wrap : bool
        Put every atom back into the new cell (lateral coordinates only).

    Returns
    -------
    ase.Atoms
        A new slab; the input is not changed. Atoms are ordered translation by translation
        (all atoms of the current cell for the first lattice point, then the next ...).
        ``surfgeo_origin`` and ``surfgeo_cell_shift`` map each atom to its 1x1 origin,
        adsorbate molecule numbers are renumbered so that each copy is its own molecule.

    Raises
    ------
    NotationError
        Bad matrix or Wood notation.
    StructureError
        The new cell is not a superlattice of the slab's current cell.

    Examples
    --------
    >>> from ase.build import fcc100
    >>> s = make_supercell(fcc100("Cu", (1, 1, 3), vacuum=5.0), [[1, 1], [-1, 1]])
    >>> len(s), s.info["surfgeo"]["supercell_matrix"]
    (6, [[1, 1], [-1, 1]])
    """
    info = surface_info(atoms)
    A = np.asarray(info.surface_cell, dtype=float)
    cell2 = slab_cell2d(atoms)
    C = np.asarray(info.supercell_matrix, dtype=int)
    if not np.allclose(C @ A, cell2, atol=1e-6):
        raise StructureError(
            "the slab's cell does not equal supercell_matrix @ surface_cell of its surfgeo record; "
            "the record is out of date."
        )
    M = as_matrix(matrix, info.lattice)
    R = M @ np.linalg.inv(C)
    if np.any(np.abs(R - np.rint(R)) > 1e-9):
        raise StructureError(
            f"the superstructure {M.tolist()} is not a superlattice of the slab's current cell "
            f"{C.tolist()}; start from the 1x1 slab."
        )
    R = np.rint(R).astype(int)
    n = lattice_points_in_cell(R)  # translations in the current cell's basis
    nat = len(atoms)
    idx = np.tile(np.arange(nat), len(n))
    tr = np.repeat(n, nat, axis=0)
    new = atoms[idx]
    new.info = copy_info(atoms)
    cell = np.asarray(atoms.cell[:], dtype=float)
    shift3 = tr @ cell[:2]
    new.positions = atoms.positions[idx] + shift3
    new_cell = cell.copy()
    new_cell[:2] = R @ cell[:2]
    new.set_cell(new_cell, scale_atoms=False)

    origin, shift = origin_map(atoms)
    new_origin = origin[idx]
    new_shift = shift[idx] + tr @ C
    if wrap:
        B = new_cell[:2, :2]
        f = new.positions[:, :2] @ np.linalg.inv(B)
        k = np.floor(f + 1e-9).astype(int)
        new.positions[:, :2] -= k @ B
        new_shift = new_shift - k @ M
    new.arrays[ORIGIN_KEY] = new_origin.astype(int)
    new.arrays[SHIFT_KEY] = new_shift.astype(int)
    ads = atoms.arrays.get(ADSORBATE_KEY)
    if ads is not None:
        ads = np.asarray(ads, dtype=int)
        top = int(ads.max()) if len(ads) else 0
        copy_number = np.repeat(np.arange(len(n)), nat)
        new.arrays[ADSORBATE_KEY] = np.where(ads[idx] > 0, ads[idx] + copy_number * top, 0)

    rec = SurfaceInfo.from_dict(info.to_dict())
    rec.supercell_matrix = M
    rec.provenance.append(f"supercell {M.tolist()} of the 1x1 cell ({len(n)} copies of the previous cell)")
    set_surface_info(new, rec)
    return new


def copy_info(atoms) -> dict:
    """A deep copy of ``atoms.info``."""
    import copy

    return copy.deepcopy(atoms.info)


__all__ = [
    "ORIGIN_KEY",
    "SHIFT_KEY",
    "ADSORBATE_KEY",
    "SUBLATTICE_KEY",
    "as_matrix",
    "copy_slab",
    "lattice_points_in_cell",
    "make_supercell",
    "origin_map",
    "slab_cell2d",
]
