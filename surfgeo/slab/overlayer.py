"""Overlayer films with their own 2D lattice: rotated, incommensurate or coincidence cells.

A :class:`Film` is a 2D crystal of its own (an oxide layer, a graphene-like sheet, a
close-packed metal film) given by its lattice vectors (rows, Angstrom, in the film's own
frame) and its basis. :func:`add_overlayer` turns it by an angle about the surface normal and
lays it at a height above the substrate. Three outcomes:

* **commensurate with the slab's cell**: the film lattice fits the cell of the slab (within
  ``max_strain``): its atoms are filled into that cell, strained to fit exactly;
* **coincidence cell**: no fit with the current cell, but a common supercell M A = N F of
  at most ``max_cells`` substrate cells exists within ``max_strain``: the slab is tiled into
  it and the film filled in;
* **incommensurate**: neither; no atoms are added. The film is recorded as a separate
  sublattice (its rotated lattice vectors, basis and height) in
  ``info["surfgeo"]["overlayers"]`` so that the diffraction module can treat it as an
  incommensurate layer, together with the size of the smallest coincidence cell found within
  the search limit (or that none was found).

Film atoms carry the film number in the per-atom array ``surfgeo_sublattice`` (0 for the
substrate and adsorbates).

Strain: with the rotated film basis F (rows) and the strained basis F' = inv(N) M A that fits
the cell, the deformation is D = F'^T inv(F^T) and the strain tensor the symmetric part
(D + D^T)/2 - 1; ``max_strain`` bounds its largest absolute eigenvalue.

References
----------
.. [1] K. Hermann, "Periodic overlayers and moire patterns: theoretical studies of
   geometric properties", J. Phys.: Condens. Matter 24, 314210 (2012) (coincidence lattices
   of rotated overlayers).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from surfgeo.checks import positive_number
from surfgeo.errors import StructureError
from surfgeo.slab.info import surface_info, update_surface_info
from surfgeo.slab.supercell import (
    ADSORBATE_KEY,
    ORIGIN_KEY,
    SHIFT_KEY,
    SUBLATTICE_KEY,
    copy_slab,
    lattice_points_in_cell,
    make_supercell,
    slab_cell2d,
)

#: Default largest strain of the film for a commensurate or coincidence cell.
MAX_STRAIN = 0.01
#: Default largest coincidence cell that is built (in substrate 1x1 cells).
MAX_CELLS = 60
#: Coincidence cells are searched up to this many substrate cells for the report.
REPORT_CELLS = 400


@dataclass(frozen=True, eq=False)
class Film:
    """A 2D film: lattice vectors and basis in the film's own frame.

    Attributes
    ----------
    vectors : ndarray, shape (2, 2)
        Rows f1, f2 in Angstrom; f1 conventionally along +x.
    basis : tuple of (symbol, f1, f2, dz)
        Atoms of one film cell: element, fractional coordinates, height (Angstrom) above the
        film's reference plane.
    name : str
        A label for records.
    """

    vectors: np.ndarray
    basis: tuple = field(default_factory=tuple)
    name: str = "film"

    def __post_init__(self) -> None:
        from ase.data import chemical_symbols

        try:
            v = np.array(self.vectors, dtype=float)
        except (TypeError, ValueError):
            raise StructureError("film vectors must be a 2x2 list of numbers (Angstrom).") from None
        if v.shape != (2, 2) or not np.all(np.isfinite(v)):
            raise StructureError(f"film vectors must be a 2x2 list of numbers, got shape {v.shape}.")
        if np.linalg.det(v) <= 1e-8:
            raise StructureError("film vectors must span a right-handed 2D cell (f1 x f2 along +z).")
        basis = []
        if not self.basis:
            raise StructureError("a film needs at least one atom in its basis.")
        for k, b in enumerate(self.basis):
            if len(b) not in (3, 4):
                raise StructureError(
                    f"film basis entry {k} must be (symbol, f1, f2) or (symbol, f1, f2, dz)."
                )
            sym = b[0]
            if sym not in chemical_symbols[1:]:
                raise StructureError(f"film basis entry {k}: {sym!r} is not a chemical symbol.")
            try:
                vals = [float(x) for x in b[1:]]
            except (TypeError, ValueError):
                raise StructureError(f"film basis entry {k}: coordinates must be numbers.") from None
            if not all(math.isfinite(x) for x in vals):
                raise StructureError(f"film basis entry {k}: coordinates must be finite.")
            basis.append((sym, vals[0], vals[1], vals[2] if len(vals) == 3 else 0.0))
        object.__setattr__(self, "vectors", v)
        object.__setattr__(self, "basis", tuple(basis))

    # ------------------------------------------------------------------ constructors
    @classmethod
    def hexagonal(cls, symbol: str, a: float, name: str = "") -> Film:
        """Close-packed monolayer: one atom per hexagonal cell (120 degrees)."""
        a = _positive("film a", a)
        v = np.array([[a, 0.0], [-a / 2, a * math.sqrt(3) / 2]])
        return cls(v, ((symbol, 0.0, 0.0, 0.0),), name or f"{symbol} hexagonal film")

    @classmethod
    def honeycomb(cls, symbol: str, a: float, other: str | None = None, name: str = "") -> Film:
        """Graphene-like honeycomb sheet (two atoms per hexagonal cell of constant ``a``)."""
        a = _positive("film a", a)
        v = np.array([[a, 0.0], [-a / 2, a * math.sqrt(3) / 2]])
        return cls(v, ((symbol, 0.0, 0.0, 0.0), (other or symbol, 1 / 3, 2 / 3, 0.0)),
                   name or f"{symbol}{other or ''} honeycomb film")

    @classmethod
    def square(cls, symbol: str, a: float, other: str | None = None, name: str = "") -> Film:
        """Square film; with ``other`` a checkerboard (rock-salt (100) monolayer of cell a)."""
        a = _positive("film a", a)
        basis = [(symbol, 0.0, 0.0, 0.0)]
        if other:
            basis.append((other, 0.5, 0.5, 0.0))
        return cls(np.array([[a, 0.0], [0.0, a]]), tuple(basis), name or f"{symbol}{other or ''} square film")

    def rotated(self, angle_deg: float) -> np.ndarray:
        """Film vectors turned anticlockwise (seen from the vacuum) by ``angle_deg``."""
        t = math.radians(float(angle_deg))
        R = np.array([[math.cos(t), -math.sin(t)], [math.sin(t), math.cos(t)]])
        return self.vectors @ R.T

    def to_dict(self) -> dict:
        return {"name": self.name, "vectors": self.vectors.tolist(),
                "basis": [list(b) for b in self.basis]}


def _positive(name: str, v) -> float:
    return positive_number(v, name, error=StructureError)


# ---------------------------------------------------------------------------- coincidence
@dataclass(frozen=True, eq=False)
class Coincidence:
    """A common supercell: ``substrate_matrix @ S = film_matrix @ F'`` with F' the strained film.

    Attributes
    ----------
    substrate_matrix, film_matrix : ndarray of int, shape (2, 2)
        Relative to the substrate cell S and the (rotated) film cell F given to the search.
    strain : ndarray, shape (2, 2)
        Strain tensor of the film (symmetric, dimensionless).
    max_strain : float
        Largest absolute eigenvalue of ``strain``.
    deformation : float
        ||D - 1|| (spectral norm) of the film deformation, strain and rotation together.
    """

    substrate_matrix: np.ndarray
    film_matrix: np.ndarray
    strain: np.ndarray
    max_strain: float
    deformation: float = 0.0

    @property
    def substrate_cells(self) -> int:
        return abs(round(float(np.linalg.det(self.substrate_matrix))))

    @property
    def film_cells(self) -> int:
        return abs(round(float(np.linalg.det(self.film_matrix))))

    def to_dict(self) -> dict:
        return {
            "substrate_matrix": self.substrate_matrix.tolist(),
            "film_matrix": self.film_matrix.tolist(),
            "substrate_cells": self.substrate_cells,
            "film_cells": self.film_cells,
            "max_strain": self.max_strain,
            "deformation": self.deformation,
        }


def film_strain(F: np.ndarray, F_fit: np.ndarray) -> np.ndarray:
    """Strain tensor taking film basis F (rows) to F_fit: sym(F_fit^T inv(F^T)) - 1."""
    D = F_fit.T @ np.linalg.inv(F.T)
    return (D + D.T) / 2 - np.eye(2)


def _max_eig(eps: np.ndarray) -> float:
    return float(np.max(np.abs(np.linalg.eigvalsh(eps))))


def find_coincidence(substrate, film, max_strain: float = MAX_STRAIN, max_cells: int = MAX_CELLS):
    """The smallest common supercell of two 2D lattices within a strain limit.

    Candidate cell vectors are the substrate lattice vectors no longer than
    2 sqrt(max_cells x cell area) that lie within the strain limit of a film lattice
    vector; every right-handed pair of them with at most ``max_cells`` substrate cells is a
    candidate cell, and the film deformation D that makes the film fit it exactly must
    satisfy ||D - 1|| <= max_strain (spectral norm, so that neither strain nor an extra
    rotation of the film exceeds the limit). Very elongated cells (aspect ratio above about
    4) are not searched.

    Parameters
    ----------
    substrate : array_like (2, 2)
        Substrate cell S (rows, Angstrom).
    film : array_like (2, 2)
        Film cell F (rows, Angstrom), already rotated into the substrate frame.
    max_strain : float
        Largest allowed film deformation (see above).
    max_cells : int
        Largest supercell, in substrate cells.

    Returns
    -------
    Coincidence or None
        The cell with the fewest substrate cells (then the least strain); right-handed,
        Gauss-reduced, first vector pointing to +x where possible. None if there is none
        within the limits.

    Examples
    --------
    >>> S = [[2.5, 0.0], [-1.25, 2.165063509]]
    >>> F = [[2.0, 0.0], [-1.0, 1.732050808]]
    >>> c = find_coincidence(S, F, 0.001, 20)
    >>> c.substrate_cells, c.film_cells
    (16, 25)
    """
    S = np.asarray(substrate, dtype=float)
    F = np.asarray(film, dtype=float)
    area = abs(float(np.linalg.det(S)))
    max_cells = int(max_cells)
    if max_cells < 1:
        raise StructureError(f"max_cells must be at least 1, got {max_cells}.")
    lmax = 2.0 * math.sqrt(max_cells * area) * 1.0001
    widths = np.array([area / np.linalg.norm(S[1]), area / np.linalg.norm(S[0])])
    n = np.ceil(lmax / widths).astype(int)
    g1, g2 = np.meshgrid(np.arange(-n[0], n[0] + 1), np.arange(-n[1], n[1] + 1), indexing="ij")
    m = np.column_stack([g1.ravel(), g2.ravel()])
    v = m @ S
    ln = np.linalg.norm(v, axis=1)
    ok = (ln > 1e-9) & (ln <= lmax)
    m, v, ln = m[ok], v[ok], ln[ok]
    nf = np.rint(v @ np.linalg.inv(F))
    mis = np.linalg.norm(v - nf @ F, axis=1) / ln
    good = (mis <= max_strain * 1.0001 + 1e-12) & np.any(nf != 0, axis=1)
    m, nf, ln = m[good], nf[good].astype(np.int64), ln[good]
    if len(m) < 2:
        return None
    order = np.argsort(ln, kind="stable")[:800]
    m, nf = m[order], nf[order]
    det = m[:, None, 0] * m[None, :, 1] - m[:, None, 1] * m[None, :, 0]
    ii, jj = np.nonzero((det > 0) & (det <= max_cells))
    if len(ii) == 0:
        return None
    Ms = np.stack([m[ii], m[jj]], axis=1).astype(float)  # (P, 2, 2)
    Nf = np.stack([nf[ii], nf[jj]], axis=1).astype(float)
    dn = Nf[:, 0, 0] * Nf[:, 1, 1] - Nf[:, 0, 1] * Nf[:, 1, 0]
    keep = np.abs(dn) > 0.5
    if not np.any(keep):
        return None
    Ms, Nf, dn, ii, jj = Ms[keep], Nf[keep], dn[keep], ii[keep], jj[keep]
    Ninv = np.stack([np.stack([Nf[:, 1, 1], -Nf[:, 0, 1]], axis=1),
                     np.stack([-Nf[:, 1, 0], Nf[:, 0, 0]], axis=1)], axis=1) / dn[:, None, None]
    Ffit = Ninv @ (Ms @ S)  # (P, 2, 2)
    D = np.transpose(Ffit, (0, 2, 1)) @ np.linalg.inv(F.T)
    dev = np.linalg.norm(D - np.eye(2), ord=2, axis=(1, 2))
    fine = dev <= max_strain + 1e-12
    if not np.any(fine):
        return None
    cells = det[ii, jj]
    cand = np.nonzero(fine)[0]
    best = cand[np.lexsort((dev[cand], cells[cand]))[0]]
    Msb = Ms[best].astype(int)
    Nfb = np.rint(Nf[best]).astype(int)
    # Gauss-reduce the common cell (same unimodular change on both matrices)
    B = (Msb @ S).astype(float)
    T = np.eye(2, dtype=int)
    for _ in range(100):
        if B[0] @ B[0] > B[1] @ B[1] * (1 + 1e-9):
            B, T = B[::-1].copy(), T[::-1].copy()
        mu = round(float(B[0] @ B[1]) / float(B[0] @ B[0]))
        if mu == 0:
            break
        B[1] -= mu * B[0]
        T[1] -= mu * T[0]
    if np.linalg.det(B) < 0:
        B[1], T[1] = -B[1], -T[1]
    if B[0, 0] < -1e-9 or (abs(B[0, 0]) <= 1e-9 and B[0, 1] < 0):
        T = -T  # both rows negated: same cell, same handedness
    Msb, Nfb = T @ Msb, T @ Nfb
    eps = film_strain(F, np.linalg.solve(Nfb.astype(float), Msb @ S))
    return Coincidence(Msb, Nfb, eps, _max_eig(eps), float(dev[best]))


# ---------------------------------------------------------------------------- placement
@dataclass(frozen=True)
class OverlayerReport:
    """What :func:`add_overlayer` did.

    Attributes
    ----------
    outcome : str
        ``"commensurate"`` (filled into the slab's cell), ``"coincidence"`` (slab tiled into
        a common supercell and filled) or ``"incommensurate"`` (recorded only).
    atoms_added : int
    supercell_matrix : list or None
        The slab's new supercell matrix (1x1 units) when it was tiled.
    coincidence : dict or None
        The smallest coincidence cell found within :data:`REPORT_CELLS` (its size when too
        large to build), or None.
    max_strain : float or None
    """

    outcome: str
    atoms_added: int
    supercell_matrix: list | None
    coincidence: dict | None
    max_strain: float | None

    def to_dict(self) -> dict:
        return dict(self.__dict__)


def _fit_current(B: np.ndarray, F: np.ndarray, max_strain: float):
    N = np.rint(B @ np.linalg.inv(F))
    if abs(round(float(np.linalg.det(N)))) == 0:
        return None
    Ffit = np.linalg.solve(N, B)
    D = Ffit.T @ np.linalg.inv(F.T)
    if float(np.linalg.norm(D - np.eye(2), ord=2)) > max_strain + 1e-12:
        return None
    return N.astype(int), Ffit, _max_eig(film_strain(F, Ffit))


def add_overlayer(
    atoms,
    film: Film,
    rotation: float = 0.0,
    height: float = 2.5,
    shift=(0.0, 0.0),
    max_strain: float = MAX_STRAIN,
    max_cells: int = MAX_CELLS,
    build: bool = True,
):
    """Lay a film on a slab: filled in when it fits a (coincidence) cell, else recorded only.

    Parameters
    ----------
    atoms : ase.Atoms
        The slab.
    film : Film
        The film in its own frame.
    rotation : float
        Angle (degrees, anticlockwise seen from the vacuum) between the film's f1 and the
        substrate's +x (the substrate a1).
    height : float
        Height (Angstrom) of the film's reference plane above the highest substrate atom.
    shift : (float, float)
        Lateral offset of the film origin, fractional coordinates of the *film* cell.
    max_strain : float
        Largest film strain accepted for a commensurate or coincidence fit.
    max_cells : int
        Largest coincidence cell (in substrate 1x1 cells) that is built.
    build : bool
        Allow tiling the slab into a coincidence supercell.

    Returns
    -------
    (ase.Atoms, OverlayerReport)
        The new slab (the input is unchanged) and the outcome. The record
        ``info["surfgeo"]["overlayers"]`` gets the film: rotated lattice vectors, basis,
        height, rotation, outcome, strain and film matrix.
    """
    if not isinstance(film, Film):
        raise StructureError("add_overlayer needs a Film (see surfgeo.slab.overlayer.Film).")
    rot = float(rotation)
    h = float(height)
    if not (math.isfinite(rot) and math.isfinite(h)):
        raise StructureError("overlayer rotation and height must be finite numbers.")
    if max_strain < 0 or not math.isfinite(max_strain):
        raise StructureError(f"max_strain must be a non-negative number, got {max_strain!r}.")
    try:
        sh = np.array(shift, dtype=float).reshape(2)
    except (TypeError, ValueError):
        raise StructureError("overlayer shift must be two fractional coordinates of the film cell.") from None
    info = surface_info(atoms)
    B = slab_cell2d(atoms)
    F = film.rotated(rot)
    fit = _fit_current(B, F, max_strain)
    new = copy_slab(atoms)
    outcome = "incommensurate"
    report_coinc = None
    new_matrix = None
    if fit is not None:
        outcome = "commensurate"
    else:
        C = np.asarray(info.supercell_matrix)
        co = find_coincidence(B, F, max_strain, max(1, max_cells // max(1, abs(round(np.linalg.det(C))))))
        if co is not None and build:
            M = co.substrate_matrix @ C
            new = make_supercell(atoms, M)
            new_matrix = M.tolist()
            B = slab_cell2d(new)
            fit = _fit_current(B, F, max_strain)
            outcome = "coincidence" if fit is not None else "incommensurate"
            report_coinc = {**co.to_dict(), "substrate_matrix": M.tolist(),
                            "substrate_cells": abs(round(float(np.linalg.det(M))))}
        else:
            big = find_coincidence(slab_cell2d(atoms), F, max_strain, REPORT_CELLS)
            if big is not None:
                M = big.substrate_matrix @ C
                report_coinc = {**big.to_dict(), "substrate_matrix": M.tolist(),
                                "substrate_cells": abs(round(float(np.linalg.det(M))))}
    added = 0
    strain = None
    film_matrix = None
    if fit is not None:
        N, Ffit, strain = fit
        film_matrix = N.tolist()
        pts = lattice_points_in_cell(N)
        zref = float(new.positions[:, 2].max()) if len(new) else 0.0
        sub_mask = np.ones(len(new), dtype=bool)
        for key in (ADSORBATE_KEY, SUBLATTICE_KEY):
            if key in new.arrays:
                sub_mask &= np.asarray(new.arrays[key]) == 0
        if np.any(sub_mask):
            zref = float(new.positions[sub_mask, 2].max())
        syms, pos = [], []
        for sym, f1, f2, dz in film.basis:
            xy = (pts + np.array([f1, f2]) + sh) @ Ffit
            syms.extend([sym] * len(pts))
            z = np.full(len(pts), zref + h + dz)
            pos.append(np.column_stack([xy, z]))
        pos = np.concatenate(pos)
        Binv = np.linalg.inv(B)
        f = pos[:, :2] @ Binv
        pos[:, :2] = (f - np.floor(f + 1e-9)) @ B
        from ase import Atoms

        n0 = len(new)
        sub_ids = np.asarray(new.arrays.get(SUBLATTICE_KEY, np.zeros(n0, int)), dtype=int)
        film_id = int(sub_ids.max()) + 1 if n0 else 1
        new.arrays[SUBLATTICE_KEY] = sub_ids
        new.extend(Atoms(symbols=syms, positions=pos))
        new.arrays[SUBLATTICE_KEY][n0:] = film_id
        if ORIGIN_KEY in new.arrays:
            new.arrays[ORIGIN_KEY][n0:] = -1
        if SHIFT_KEY in new.arrays:
            new.arrays[SHIFT_KEY][n0:] = 0
        added = len(pos)
    rec = {
        **film.to_dict(),
        "rotation_deg": rot,
        "rotated_vectors": F.tolist(),
        "height": h,
        "shift": sh.tolist(),
        "outcome": outcome,
        "film_matrix": film_matrix,
        "max_strain": strain,
        "coincidence": report_coinc,
        "atoms_added": added,
    }
    prev = surface_info(new).extra.get("overlayers", [])
    line = f"overlayer {film.name} rotated {rot:g} deg: {outcome}"
    if outcome == "incommensurate":
        line += (f"; smallest coincidence cell {report_coinc['substrate_cells']} substrate cells"
                 if report_coinc else f"; no coincidence cell within {REPORT_CELLS} substrate cells")
    update_surface_info(new, provenance=line, overlayers=list(prev) + [rec])
    report = OverlayerReport(outcome, added, new_matrix, report_coinc, strain)
    return new, report


__all__ = [
    "MAX_CELLS",
    "MAX_STRAIN",
    "REPORT_CELLS",
    "Coincidence",
    "Film",
    "OverlayerReport",
    "add_overlayer",
    "film_strain",
    "find_coincidence",
]
