"""Symmetry of slabs: spglib's layer group and the 2D plane group seen at normal incidence.

How the plane group is derived
------------------------------
1. The slab is handed to spglib's layer-group finder (``spglib.get_symmetry_layerdataset``,
   spglib >= 2.5, aperiodic direction c) in a cell whose third vector is exactly along z and
   longer than the slab plus 20 Angstrom, so that any shear of the slab's own c vector and the
   vacuum play no part.
2. Of the layer-group operations only those that keep +z (R_zz = +1: rotations about the
   normal, mirror and glide planes containing the normal) act on a surface seen by an
   electron beam at normal incidence; operations that turn the slab upside down (inversion,
   horizontal mirrors, two-fold axes in the plane) only relate the top to the bottom surface
   and are dropped.
3. The kept operations, restricted to the plane, form one of the 17 plane groups. It is
   named from (a) its point group (rotation order and whether mirrors occur), (b) for every
   mirror whether it is a true mirror or a glide line, found from the intrinsic glide part
   (t + R t) / 2 compared with the projection of the lattice onto the mirror line, (c) for
   the point groups m and 2mm whether the lattice is centred with respect to the mirror
   lines, and (d) for 3m whether the mirror lines run along (p31m) or across (p3m1) the
   shortest lattice vectors.

Pass ``layers=N`` to use only the top N atomic layers (what a low-energy electron sees).

References
----------
.. [1] International Tables for Crystallography, Vol. A (Springer/IUCr), the 17 plane groups.
.. [2] International Tables for Crystallography, Vol. E, subperiodic (layer) groups.
.. [3] A. Togo, K. Shinohara and I. Tanaka, "Spglib: a software library for crystal symmetry
   search", Sci. Technol. Adv. Mater. Meth. 4, 2384822 (2024).
"""

from __future__ import annotations

import itertools
import math
from dataclasses import dataclass

import numpy as np

from surfgeo.errors import ComputationError, StructureError
from surfgeo.lattice.lattice2d import gauss_reduce
from surfgeo.slab.layers import LAYER_TOL, group_layers
from surfgeo.slab.supercell import slab_cell2d

#: Default spglib tolerance (Angstrom) for slabs.
SYMPREC = 1e-3

#: Names of the 17 plane groups (short Hermann-Mauguin symbols as used by surfgeo).
PLANE_GROUPS: tuple[str, ...] = (
    "p1", "p2", "pm", "pg", "cm", "p2mm", "p2mg", "p2gg", "c2mm",
    "p4", "p4mm", "p4g", "p3", "p3m1", "p31m", "p6", "p6mm",
)

#: The 2D point group of each plane group.
PLANE_POINT_GROUP: dict[str, str] = {
    "p1": "1", "p2": "2", "pm": "m", "pg": "m", "cm": "m",
    "p2mm": "2mm", "p2mg": "2mm", "p2gg": "2mm", "c2mm": "2mm",
    "p4": "4", "p4mm": "4mm", "p4g": "4mm", "p3": "3", "p3m1": "3m", "p31m": "3m",
    "p6": "6", "p6mm": "6mm",
}


@dataclass(frozen=True)
class PlaneOperation:
    """One operation of the plane group: r' = rotation @ r + translation (Cartesian, Angstrom).

    ``kind`` is ``"rotation"`` (including the identity), ``"mirror"`` or ``"glide"``.
    """

    rotation: np.ndarray
    translation: np.ndarray
    kind: str


@dataclass(frozen=True)
class LayerSymmetry:
    """Symmetry of a slab.

    Attributes
    ----------
    layer_group : int
        Layer group number 1-80 (International Tables Vol. E) from spglib.
    layer_symbol : str
        Its Hermann-Mauguin symbol as spglib prints it, e.g. ``"p-3m1"``.
    plane_group : str
        The 2D plane group of the operations that keep +z, e.g. ``"p3m1"``.
    point_group : str
        Its 2D point group, e.g. ``"3m"``.
    operations : list of PlaneOperation
        The plane-group operations (one per coset of the lattice translations).
    flips_z : bool
        True when some layer-group operation maps the slab onto itself upside down (the two
        surfaces are equivalent).
    """

    layer_group: int
    layer_symbol: str
    plane_group: str
    point_group: str
    operations: tuple[PlaneOperation, ...]
    flips_z: bool

    def to_dict(self) -> dict:
        return {
            "layer_group": self.layer_group,
            "layer_symbol": self.layer_symbol,
            "plane_group": self.plane_group,
            "point_group": self.point_group,
            "top_bottom_equivalent": self.flips_z,
        }


def _spglib_cell(atoms, layers: int | None):
    A = slab_cell2d(atoms)
    pos = np.asarray(atoms.positions, dtype=float)
    numbers = np.asarray(atoms.numbers)
    if len(pos) == 0:
        raise StructureError("the slab has no atoms.")
    if layers is not None:
        if int(layers) < 1:
            raise StructureError(f"layers must be a positive number of top layers, got {layers!r}.")
        groups = group_layers(pos[:, 2], LAYER_TOL)
        keep = np.concatenate(groups[-int(layers):])
        pos, numbers = pos[keep], numbers[keep]
    z0, z1 = float(pos[:, 2].min()), float(pos[:, 2].max())
    height = (z1 - z0) + 20.0
    lattice = np.zeros((3, 3))
    lattice[:2, :2] = A
    lattice[2, 2] = height
    frac = np.empty_like(pos)
    frac[:, :2] = pos[:, :2] @ np.linalg.inv(A)
    frac[:, :2] -= np.floor(frac[:, :2])
    frac[:, 2] = (pos[:, 2] - z0 + 10.0) / height
    return lattice, frac, numbers


def _lattice_vectors(A: np.ndarray, nmax: int = 4) -> np.ndarray:
    """All lattice vectors i a1 + j a2 with |i|, |j| <= nmax except zero (Cartesian rows)."""
    r = np.arange(-nmax, nmax + 1)
    ij = np.array([(i, j) for i, j in itertools.product(r, r) if (i, j) != (0, 0)], dtype=float)
    return ij @ A


def _layer_dataset(spglib, lattice, frac, numbers, symprec):
    try:  # _throw=True: errors are raised rather than signalled by None (spglib >= 2.5)
        data = spglib.get_symmetry_layerdataset(
            (lattice, frac, numbers), aperiodic_dir=2, symprec=symprec, _throw=True
        )
    except Exception:  # spglib raises its own SpglibError
        data = None
    if data is None:
        raise ComputationError(
            f"spglib found no layer group for this slab (symprec={symprec} Angstrom)."
        )
    return data


def _primitive_cell(lattice, frac, numbers, P, symprec):
    """The same slab in the in-plane cell P (rows, Cartesian): one copy of each atom."""
    cart = frac @ lattice
    new = lattice.copy()
    new[:2, :2] = P
    f = cart[:, :2] @ np.linalg.inv(P)
    f -= np.floor(f)
    step = max(symprec, 1e-5) / max(np.linalg.norm(P, axis=1).max(), 1.0)
    key = np.rint(f / step).astype(np.int64)
    nmax = np.rint(1.0 / step).astype(np.int64)
    key %= nmax
    zkey = np.rint(cart[:, 2] / max(symprec, 1e-5)).astype(np.int64)
    table = np.column_stack([numbers, key, zkey])
    _, first = np.unique(table, axis=0, return_index=True)
    first = np.sort(first)
    out = np.empty((len(first), 3))
    out[:, :2] = f[first]
    out[:, 2] = frac[first, 2]
    return new, out, numbers[first]


def _translation_lattice(A: np.ndarray, translations: list[np.ndarray]) -> np.ndarray:
    """Primitive 2D lattice generated by the cell rows A and extra pure translations."""
    A = gauss_reduce(A)[0]
    inv = np.linalg.inv(A)
    cands = [A[0], A[1]]
    for t in translations:
        f = t @ inv
        f = f - np.rint(f)
        if np.linalg.norm(f @ A) < 1e-6:
            continue
        for i, j in itertools.product((-1, 0, 1), repeat=2):
            cands.append((f + (i, j)) @ A)
    cands = [c for c in cands if np.linalg.norm(c) > 1e-6]
    cands.sort(key=lambda c: float(c @ c))
    v1 = cands[0]
    for c in cands[1:]:
        if abs(v1[0] * c[1] - v1[1] * c[0]) > 1e-6 * float(v1 @ v1):
            return gauss_reduce(np.array([v1, c]))[0]
    return A  # pragma: no cover - A always holds two independent vectors


def _classify(ops: list[tuple[np.ndarray, np.ndarray]], A: np.ndarray, tol: float):
    """Name the plane group of 2D operations (R, t) on the lattice with rows A."""
    A = gauss_reduce(A)[0]
    area = abs(float(np.linalg.det(A)))
    vecs = _lattice_vectors(A)
    lengths = np.linalg.norm(vecs, axis=1)
    proper = [op for op in ops if np.linalg.det(op[0]) > 0]
    mirrors = [op for op in ops if np.linalg.det(op[0]) < 0]
    n = len(proper)
    if n not in (1, 2, 3, 4, 6) or (mirrors and len(mirrors) != n):
        raise ComputationError(
            f"spglib returned {n} rotations and {len(mirrors)} mirrors, which is no 2D point group."
        )
    kinds: list[str] = ["rotation"] * n
    true_mirror = []
    mirror_dirs = []
    for R, t in mirrors:
        w, v = np.linalg.eigh((R + R.T) / 2.0)
        m = v[:, int(np.argmax(w))]  # unit vector along the mirror line
        mirror_dirs.append(m)
        g = float(((t + R @ t) / 2.0) @ m)  # intrinsic glide along the line
        proj = np.abs(vecs @ m)
        s = float(proj[proj > tol].min())  # spacing of the lattice projected onto the line
        is_mirror = abs(g / s - round(g / s)) * s <= tol
        true_mirror.append(is_mirror)
        kinds.append("mirror" if is_mirror else "glide")
    if not mirrors:
        name = {1: "p1", 2: "p2", 3: "p3", 4: "p4", 6: "p6"}[n]
        return name, kinds
    if n == 6:
        return "p6mm", kinds
    if n == 4:
        return ("p4mm" if all(true_mirror) else "p4g"), kinds
    if n == 3:
        shortest = vecs[lengths <= lengths.min() * (1 + 1e-6)]
        m = mirror_dirs[0]
        along = np.any(np.abs(np.abs(shortest @ m) - np.linalg.norm(shortest, axis=1)) < tol)
        return ("p31m" if along else "p3m1"), kinds

    # point groups m and 2mm: centred or primitive with respect to the mirror lines
    def shortest_along(d):
        par = np.abs(np.abs(vecs @ d) - lengths) <= tol
        return vecs[par][np.argmin(lengths[par])] if np.any(par) else None

    m = mirror_dirs[0]
    perp = np.array([-m[1], m[0]])
    u, w = shortest_along(m), shortest_along(perp)
    centred = u is not None and w is not None and abs(u[0] * w[1] - u[1] * w[0]) > 1.5 * area
    if n == 1:
        if centred:
            return "cm", kinds
        return ("pm" if true_mirror[0] else "pg"), kinds
    if centred:
        return "c2mm", kinds
    return {2: "p2mm", 1: "p2mg", 0: "p2gg"}[sum(true_mirror)], kinds


def layer_symmetry(atoms, symprec: float = SYMPREC, layers: int | None = None) -> LayerSymmetry:
    """Layer group (spglib) and plane group at normal incidence of a slab.

    Parameters
    ----------
    atoms : ase.Atoms
        A slab whose first two cell vectors lie in the xy-plane; +z points into the vacuum.
    symprec : float
        Distance tolerance in Angstrom passed to spglib.
    layers : int, optional
        Use only the top ``layers`` atomic layers (grouped with
        :data:`surfgeo.slab.layers.LAYER_TOL`).

    Returns
    -------
    LayerSymmetry

    Raises
    ------
    StructureError
        If the cell does not follow the slab convention.
    ComputationError
        If spglib finds no layer group.

    Examples
    --------
    >>> from ase.build import fcc111
    >>> layer_symmetry(fcc111("Pt", (1, 1, 3), vacuum=6.0)).plane_group
    'p3m1'
    """
    import spglib

    lattice, frac, numbers = _spglib_cell(atoms, layers)
    data = _layer_dataset(spglib, lattice, frac, numbers, symprec)
    # spglib only reports operations that map the *given* cell onto itself; a supercell such
    # as 2x3 of a square lattice hides the four-fold axis. Re-express the slab in its
    # primitive in-plane cell first.
    pure = [
        (lattice.T @ t)[:2]
        for W, t in zip(data.rotations, data.translations, strict=True)
        if np.array_equal(W, np.eye(3, dtype=W.dtype))
    ]
    P = _translation_lattice(lattice[:2, :2], pure)
    if abs(np.linalg.det(P)) < abs(np.linalg.det(lattice[:2, :2])) * (1 - 1e-6):
        lattice, frac, numbers = _primitive_cell(lattice, frac, numbers, P, symprec)
        data = _layer_dataset(spglib, lattice, frac, numbers, symprec)
    L = lattice.T  # columns are lattice vectors: r = L @ x
    Linv = np.linalg.inv(L)
    ops2d = []
    flips = False
    seen = set()
    pure_translations = []
    for W, t in zip(data.rotations, data.translations, strict=True):
        R = L @ W @ Linv
        if np.array_equal(W, np.eye(3, dtype=W.dtype)):
            pure_translations.append((L @ t)[:2])
        if R[2, 2] < 0:
            flips = True
            continue
        R2 = R[:2, :2]
        t2 = (L @ t)[:2]
        key = tuple(np.rint(R2 * 1e4).astype(int).ravel())
        if key in seen:  # one operation per point operation (cosets of translations)
            continue
        seen.add(key)
        ops2d.append((R2, t2))
    A = _translation_lattice(lattice[:2, :2], pure_translations)
    name, kinds = _classify(ops2d, A, tol=max(10 * symprec, 1e-4))
    proper = [op for op in ops2d if np.linalg.det(op[0]) > 0]
    improper = [op for op in ops2d if np.linalg.det(op[0]) < 0]
    operations = tuple(
        PlaneOperation(np.array(R), np.array(t), k)
        for (R, t), k in zip(proper + improper, kinds, strict=True)
    )
    return LayerSymmetry(
        layer_group=int(data.number),
        layer_symbol=str(data.international),
        plane_group=name,
        point_group=PLANE_POINT_GROUP[name],
        operations=operations,
        flips_z=flips,
    )


def plane_group(atoms, symprec: float = SYMPREC, layers: int | None = None) -> str:
    """The 2D plane group of a slab as seen at normal incidence, e.g. ``"p4mm"``, ``"p4g"``.

    See :func:`layer_symmetry` for the parameters and the module docstring for how the
    plane group is derived from spglib's layer group.
    """
    return layer_symmetry(atoms, symprec=symprec, layers=layers).plane_group


def rotation_angle_deg(op: PlaneOperation) -> float:
    """Rotation angle (proper operations) or mirror-line angle from +x (improper), degrees."""
    R = op.rotation
    ang = math.degrees(math.atan2(R[1, 0], R[0, 0]))
    if np.linalg.det(R) > 0:
        return ang % 360.0
    return (ang / 2.0) % 180.0


__all__ = [
    "SYMPREC",
    "PLANE_GROUPS",
    "PLANE_POINT_GROUP",
    "PlaneOperation",
    "LayerSymmetry",
    "layer_symmetry",
    "plane_group",
    "rotation_angle_deg",
]
