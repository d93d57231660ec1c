"""What relaxed: a relaxed slab compared atom by atom with its reference.

The reference is the ideal (bulk-terminated or model) slab; the relaxed slab is what a DFT
(or force-field) relaxation returned. The comparison goes in three steps:

1. **Same system?** Same number of atoms, same species, same surface cell (lengths and
   angle of a1, a2; the frame may be rotated, as in LAMMPS files). Otherwise refuse.
2. **Matching.** Atom i of the reference is matched to the relaxed atom it became: by
   index when the file kept the order, otherwise by a minimum-distance assignment under
   the periodic boundary conditions of the surface cell (the sum of squared
   minimum-image distances is minimised, species by species). Atoms wrapped across the
   cell boundary, in-plane or along c, are handled.
3. **Analysis.** Displacements (minimum image) are grouped by the layers of the reference
   slab: change of each interlayer spacing Delta d_ij in Angstrom and in % of the
   reference spacing, buckling (rumpling) of each layer, mean lateral shift; for
   adsorbates, height above the outermost substrate layer, bond lengths to the nearest
   substrate atoms and the site registry (top, bridge, hollow).

Layers are numbered from the outer (top) face: layer 1 is the top substrate layer and
``d12`` the spacing between layers 1 and 2, as usual in surface crystallography. The
percentages are relative to the spacings of the reference, which are the bulk spacings
when the reference is a bulk-terminated slab.

Coordinates: heights along the surface normal ``n = a1 x a2 / |a1 x a2|``; lateral
components in the orthonormal in-plane basis ``e1 = a1 / |a1|, e2 = n x e1`` (x and y for
slabs in the surfgeo cell convention).
"""

from __future__ import annotations

import math
from collections import Counter
from dataclasses import dataclass, field

import numpy as np

from surfgeo.checks import positive_number
from surfgeo.errors import InputError, StructureError
from surfgeo.lattice import Lattice2D
from surfgeo.slab.dipole import surface_normal, unwrap_shifts
from surfgeo.slab.layers import LAYER_TOL, group_layers

#: Largest displacement (Angstrom) accepted before the two structures are declared different.
MAX_DISPLACEMENT = 2.0
#: Default tolerance (Angstrom) on the lengths of the in-plane cell vectors.
CELL_TOL = 0.02
#: Above this many atoms of one species, the distance assignment uses a sparse candidate graph.
DENSE_LIMIT = 1500
#: Neighbours per atom in the sparse candidate graph.
SPARSE_NEIGHBOURS = 12


# --------------------------------------------------------------------------- frames
@dataclass(frozen=True)
class SurfaceFrame:
    """An orthonormal frame of a slab: in-plane axes e1, e2 and the normal n (rows of ``axes``)."""

    axes: np.ndarray  # (3, 3) rows e1, e2, n
    lattice: np.ndarray  # (2, 2) in-plane cell vectors in (e1, e2) coordinates
    extent: float  # c . n, Angstrom (0 when there is no c)
    c: np.ndarray  # third cell vector, Cartesian

    @classmethod
    def of(cls, cell) -> SurfaceFrame:
        cell = np.asarray(cell, dtype=float)
        n = surface_normal(cell)
        e1 = cell[0] / np.linalg.norm(cell[0])
        e2 = np.cross(n, e1)
        axes = np.array([e1, e2, n])
        lat = cell[:2] @ axes[:2].T
        extent = float(cell[2] @ n) if np.linalg.norm(cell[2]) > 1e-12 else 0.0
        return cls(axes=axes, lattice=lat, extent=extent, c=cell[2].copy())

    def local(self, positions) -> np.ndarray:
        """Positions in (e1, e2, n) coordinates."""
        return np.asarray(positions, dtype=float) @ self.axes.T


def _minimum_image_2d(d: np.ndarray, lattice: np.ndarray) -> np.ndarray:
    """Reduce lateral difference vectors (..., 2) to their shortest periodic image."""
    red, _ = Lattice2D(lattice).reduced()
    v = red.vectors
    inv = np.linalg.inv(v)
    f = d @ inv
    d0 = (f - np.round(f)) @ v
    offsets = np.array([[i, j] for i in (-1, 0, 1) for j in (-1, 0, 1)], dtype=float) @ v
    cand = d0[..., None, :] + offsets  # (..., 9, 2)
    k = np.argmin(np.einsum("...ij,...ij->...i", cand, cand), axis=-1)
    return np.take_along_axis(cand, k[..., None, None], axis=-2)[..., 0, :]


# --------------------------------------------------------------------------- same system
def _formula(numbers) -> str:
    from ase.data import chemical_symbols

    counts = Counter(chemical_symbols[int(z)] for z in numbers)
    return " ".join(f"{s}{counts[s]}" for s in sorted(counts))


def check_same_system(reference, relaxed, cell_tol: float = CELL_TOL) -> None:
    """Refuse (StructureError) unless ``relaxed`` can be a relaxation of ``reference``.

    Same number of atoms, same species with the same counts, and the same surface cell:
    lengths of a1 and a2 within ``cell_tol`` Angstrom and the angle between them within
    0.1 degree.
    """
    if len(reference) != len(relaxed):
        raise StructureError(
            f"the relaxed structure has {len(relaxed)} atoms but the reference has {len(reference)}; "
            "they are not the same system."
        )
    if sorted(reference.numbers.tolist()) != sorted(relaxed.numbers.tolist()):
        raise StructureError(
            f"the relaxed structure contains {_formula(relaxed.numbers)} but the reference "
            f"{_formula(reference.numbers)}; they are not the same system."
        )
    for name, atoms in (("reference", reference), ("relaxed structure", relaxed)):
        cell = np.asarray(atoms.cell, dtype=float)
        if np.linalg.norm(np.cross(cell[0], cell[1])) < 1e-9:
            raise StructureError(
                f"the {name} has no surface cell (a1 and a2 are missing or parallel); "
                "use a file that stores the cell."
            )
    ra, rb = np.asarray(reference.cell)[:2], np.asarray(relaxed.cell)[:2]
    la, lb = np.linalg.norm(ra, axis=1), np.linalg.norm(rb, axis=1)
    ga = math.degrees(math.acos(np.clip(ra[0] @ ra[1] / (la[0] * la[1]), -1, 1)))
    gb = math.degrees(math.acos(np.clip(rb[0] @ rb[1] / (lb[0] * lb[1]), -1, 1)))
    if np.any(np.abs(la - lb) > cell_tol) or abs(ga - gb) > 0.1:
        raise StructureError(
            f"the surface cells differ (|a1|, |a2|, angle: reference {la[0]:.4f}, {la[1]:.4f} A, "
            f"{ga:.2f} deg; "
            f"relaxed {lb[0]:.4f}, {lb[1]:.4f} A, {gb:.2f} deg); relaxations are measured in the same "
            "surface cell, so compare with a reference of that cell."
        )


def _local_positions(reference, relaxed) -> tuple[np.ndarray, np.ndarray, SurfaceFrame]:
    """Unwrapped local (e1, e2, n) coordinates of both structures, in the reference's frame.

    The relaxed frame (a1, a2, n) is mapped onto the reference's, which removes a rotation
    of the whole cell (as in LAMMPS files) and absorbs in-plane cell differences below the
    tolerance. Both slabs are made contiguous along the normal (atoms wrapped across the
    cell along c are moved back by whole c vectors), and the relaxed slab is shifted by a
    whole c vector if needed to lie over the reference.
    """
    fref = SurfaceFrame.of(reference.cell)
    frel = SurfaceFrame.of(relaxed.cell)

    def to_ref(loc):
        frac = np.linalg.solve(frel.lattice.T, loc[..., :2].T).T
        return np.column_stack([frac @ fref.lattice, loc[..., 2]])

    p = fref.local(reference.positions)
    cp = fref.local(fref.c)
    p += unwrap_shifts(p[:, 2], fref.extent)[:, None] * cp
    q = to_ref(frel.local(relaxed.positions))
    cq = to_ref(frel.local(frel.c)[None, :])[0]
    q += unwrap_shifts(q[:, 2], frel.extent)[:, None] * cq
    if frel.extent > 1e-9:
        q -= np.round((q[:, 2].mean() - p[:, 2].mean()) / frel.extent) * cq
    return p, q, fref


# --------------------------------------------------------------------------- matching
@dataclass(frozen=True)
class Matching:
    """How the atoms of the relaxed structure correspond to the reference.

    Attributes
    ----------
    order : ndarray of int, shape (N,)
        ``order[i]`` is the index in the relaxed structure of reference atom ``i``.
    method : str
        ``"index"`` (file order kept) or ``"distance"`` (minimum-distance assignment).
    displacements : ndarray, shape (N, 3)
        Minimum-image displacement of each reference atom, Angstrom, in the local frame
        (e1, e2, n) of the reference.
    reference_local : ndarray, shape (N, 3)
        Reference positions in that frame, unwrapped along the normal (Angstrom).
    note : str
        Extra information (empty when there is nothing to say).
    """

    order: np.ndarray
    method: str
    displacements: np.ndarray
    reference_local: np.ndarray
    note: str = ""


def _images(points2d: np.ndarray, lattice: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Points wrapped into the reduced cell and replicated over the 3x3 neighbouring cells."""
    red = Lattice2D(lattice).reduced()[0].vectors
    f = points2d @ np.linalg.inv(red)
    wrapped = (f - np.floor(f)) @ red
    offsets = np.array([[i, j] for i in (-1, 0, 1) for j in (-1, 0, 1)], dtype=float) @ red
    return wrapped, (wrapped[None, :, :] + offsets[:, None, :]).reshape(-1, 2)


def _assign_species(p: np.ndarray, q: np.ndarray, lattice: np.ndarray) -> np.ndarray:
    """Optimal assignment of reference points ``p`` to relaxed points ``q`` (local coords).

    Returns ``col`` with ``q[col[i]]`` matched to ``p[i]``, minimising the sum of squared
    minimum-image distances.
    """
    from scipy.optimize import linear_sum_assignment
    from scipy.spatial import cKDTree

    m = len(p)
    if m == 1:
        return np.zeros(1, dtype=int)
    pw, _ = _images(p[:, :2], lattice)
    qw, qimg = _images(q[:, :2], lattice)
    qpts = np.column_stack([qimg, np.tile(q[:, 2], 9)])
    tree = cKDTree(qpts)
    ppts = np.column_stack([pw, p[:, 2]])
    dist, idx = tree.query(ppts, k=1)
    nearest = idx % m
    if len(np.unique(nearest)) == m:
        # every reference atom gets its own nearest relaxed atom: each term of the sum is
        # at its minimum, so this is the optimal assignment
        return nearest
    if m <= DENSE_LIMIT:
        cost = np.full((m, m), np.inf)
        for off in np.array([[i, j] for i in (-1, 0, 1) for j in (-1, 0, 1)], dtype=float) @ (
            Lattice2D(lattice).reduced()[0].vectors
        ):
            d2 = ((pw[:, None, :] - (qw[None, :, :] + off)) ** 2).sum(-1)
            np.minimum(cost, d2, out=cost)
        cost += (p[:, None, 2] - q[None, :, 2]) ** 2
        _, col = linear_sum_assignment(cost)
        return col
    # large: minimum-weight perfect matching on a sparse graph of near candidates
    from scipy.sparse import csr_matrix
    from scipy.sparse.csgraph import min_weight_full_bipartite_matching

    k = min(SPARSE_NEIGHBOURS, 9 * m)
    while True:
        dist, idx = tree.query(ppts, k=k)
        rows = np.repeat(np.arange(m), k)
        cols = (idx % m).ravel()
        # several images of one atom: keep the nearest (csr sums duplicates, so dedupe first)
        key = rows * m + cols
        first = np.unique(key, return_index=True)[1]
        w = dist.ravel()[first] ** 2 + 1.0  # +1 on every edge keeps zero weights stored
        graph = csr_matrix((w, (rows[first], cols[first])), shape=(m, m))
        try:
            _, col = min_weight_full_bipartite_matching(graph)
            return col
        except ValueError:
            if k >= 9 * m:
                raise
            k = min(4 * k, 9 * m)


def match_atoms(reference, relaxed, method: str = "auto", cell_tol: float = CELL_TOL) -> Matching:
    """Match every atom of ``reference`` to the atom of ``relaxed`` it became.

    Parameters
    ----------
    reference, relaxed : ase.Atoms
        The ideal (reference) and the relaxed slab. The relaxed one may list its atoms in
        any order and may have atoms wrapped across the cell boundary.
    method : {"auto", "index", "distance"}
        ``index`` keeps the file order (species must agree index by index); ``distance``
        solves the assignment that minimises the sum of squared minimum-image distances
        (species by species); ``auto`` solves the assignment and reports ``index`` when
        the result is the file order.
    cell_tol : float
        Tolerance (Angstrom) on the in-plane cell vector lengths.

    Returns
    -------
    Matching

    Raises
    ------
    StructureError
        If the two are not the same system (atom count, species, surface cell).

    Notes
    -----
    When every reference atom's nearest relaxed atom (same species, minimum image) is a
    different atom, that mapping is the optimum and no assignment problem is solved.
    Otherwise :func:`scipy.optimize.linear_sum_assignment` solves it on the full
    minimum-image distance matrix (up to :data:`DENSE_LIMIT` atoms of a species), or
    :func:`scipy.sparse.csgraph.min_weight_full_bipartite_matching` on the graph of the
    :data:`SPARSE_NEIGHBOURS` nearest candidates of each atom (larger systems; exact
    unless an atom moved past more than that many neighbours).

    References
    ----------
    R. Jonker and A. Volgenant, "A shortest augmenting path algorithm for dense and sparse
    linear assignment problems", Computing 38, 325 (1987).
    """
    if method not in ("auto", "index", "distance"):
        raise InputError(f"the matching method must be auto, index or distance, got {method!r}.")
    check_same_system(reference, relaxed, cell_tol)
    p, q, fref = _local_positions(reference, relaxed)
    zr, zx = reference.numbers, relaxed.numbers
    note = ""
    if method == "index":
        bad = np.nonzero(zr != zx)[0]
        if len(bad):
            i = int(bad[0])
            raise StructureError(
                f"atom {i} is {reference[i].symbol} in the reference but {relaxed[i].symbol} in the relaxed "
                "structure, so the order differs; match by distance instead."
            )
        order = np.arange(len(reference))
    else:
        order = np.empty(len(reference), dtype=int)
        for z in np.unique(zr):
            ir = np.nonzero(zr == z)[0]
            ix = np.nonzero(zx == z)[0]
            order[ir] = ix[_assign_species(p[ir], q[ix], fref.lattice)]
    d = q[order] - p
    d[:, :2] = _minimum_image_2d(d[:, :2], fref.lattice)
    used = method
    if method != "index":
        same = np.array_equal(order, np.arange(len(order)))
        used = "index" if same else "distance"
        moved = int(np.count_nonzero(order != np.arange(len(order))))
        # The file keeps the reference order only when the species agree index by index AND
        # most atoms are matched to their own index; a shuffled file (single-element slabs
        # and species-grouped files have identical species sequences too) gets no such note.
        if not same and np.array_equal(zr, zx) and 2 * moved <= len(order):
            note = (f"the file lists the atoms in the reference order, but {moved} of them lie nearer to "
                    "other reference positions and were matched by distance (use the index method to "
                    "keep the file order).")
    return Matching(order=order, method=used, displacements=d, reference_local=p, note=note)


# --------------------------------------------------------------------------- adsorbates
def _bulk_species(meta) -> set[str] | None:
    if not isinstance(meta, dict):
        return None
    bulk = meta.get("bulk")
    formula = bulk.get("formula") if isinstance(bulk, dict) else bulk if isinstance(bulk, str) else None
    if not formula:
        return None
    try:
        from ase.formula import Formula

        return set(Formula(str(formula)).count())
    except Exception:  # noqa: BLE001 - metadata of unknown origin: fall back to geometry
        return None


#: Per-atom arrays that mark adsorbate molecules and overlayer films (number > 0) in slabs
#: built by surfgeo's surface models (surfgeo.slab.supercell.ADSORBATE_KEY, SUBLATTICE_KEY).
MARK_ARRAYS = ("surfgeo_adsorbate", "surfgeo_sublattice")


def _marked_adsorbates(atoms) -> np.ndarray | None:
    """Atoms marked as adsorbates or overlayer by the model builder, or None if nothing is marked."""
    mask = np.zeros(len(atoms), dtype=bool)
    found = False
    for key in MARK_ARRAYS:
        if key in atoms.arrays:
            found = True
            mask |= np.asarray(atoms.arrays[key]).reshape(len(atoms), -1)[:, 0] > 0
    return mask if found and mask.any() else None


def find_adsorbates(atoms, heights: np.ndarray | None = None, select=None,
                    tol: float = LAYER_TOL) -> np.ndarray:
    """Boolean mask of the adsorbate atoms of a slab.

    Parameters
    ----------
    atoms : ase.Atoms
    heights : ndarray, optional
        Unwrapped heights along the normal (Angstrom); computed when not given.
    select : None, "none", sequence of str or sequence of int, optional
        Explicit choice: chemical symbols (every atom of those species), atom indices,
        or ``"none"``. ``None`` detects them: atoms marked by the model builder (per-atom
        arrays :data:`MARK_ARRAYS`, adsorbate molecules and overlayer films) when any are
        marked; otherwise the substrate species are those of the bulk in the slab's
        metadata (``atoms.info["surfgeo"]["bulk"]``) or else the species found in more
        than half as many layers as the most widespread species, and an atom is an
        adsorbate when it lies in a layer without substrate-species atoms (so a surface
        alloy atom in a substrate layer is not an adsorbate). Very thin slabs may need an
        explicit choice.

    Returns
    -------
    ndarray of bool
    """
    n = len(atoms)
    mask = np.zeros(n, dtype=bool)
    symbols = np.array(atoms.get_chemical_symbols())
    if isinstance(select, str):
        if select.strip().lower() == "none":
            return mask
        select = [s.strip() for s in select.split(",") if s.strip()]
    if select is not None:
        items = list(select)
        if all(isinstance(s, (int, np.integer)) for s in items):
            idx = np.asarray(items, dtype=int)
            if np.any(idx < -n) or np.any(idx >= n):
                raise InputError(f"adsorbate atom indices must lie between 0 and {n - 1}, got {items}.")
            mask[idx] = True
            return mask
        if all(isinstance(s, str) for s in items):
            unknown = sorted(set(items) - set(symbols.tolist()))
            if unknown:
                raise InputError(
                    f"adsorbate species {', '.join(unknown)} do not occur in the structure, which holds "
                    f"{', '.join(sorted(set(symbols.tolist())))}."
                )
            return np.isin(symbols, items)
        raise InputError("adsorbates must be given as chemical symbols or as atom indices, not a mixture.")
    marked = _marked_adsorbates(atoms)
    if marked is not None:
        return marked
    if heights is None:
        from surfgeo.slab.dipole import slab_heights

        heights = slab_heights(atoms)
    layers = group_layers(heights, tol)
    if not layers:
        return mask
    substrate = _bulk_species(atoms.info.get("surfgeo"))
    if not substrate:
        # species spread through more than half as many layers as the most widespread one
        counts = Counter(sym for layer in layers for sym in set(symbols[layer].tolist()))
        most = max(counts.values())
        substrate = {sym for sym, c in counts.items() if 2 * c > most}
    is_sub = np.isin(symbols, sorted(substrate))
    for layer in layers:
        if not is_sub[layer].any():
            mask[layer] = True
    return mask


def _site_label(rho: np.ndarray, below2: np.ndarray | None, below3: np.ndarray | None, a_nn: float) -> str:
    """Site registry from lateral distances to the outermost layer (and the two below)."""
    if len(rho) == 0 or not np.isfinite(a_nn):
        return "unknown"
    r = np.sort(rho)
    if r[0] < 0.2 * a_nn:
        return "top"
    k = int(np.count_nonzero(r <= r[0] + 0.12 * a_nn))
    if k == 2:
        return "bridge"
    if k == 3:
        if below2 is not None and len(below2) and below2.min() < 0.2 * a_nn:
            return "hcp hollow"
        if below3 is not None and len(below3) and below3.min() < 0.2 * a_nn:
            return "fcc hollow"
        return "threefold hollow"
    if k == 4:
        return "fourfold hollow"
    return f"{k}-fold site"


# --------------------------------------------------------------------------- report
@dataclass(frozen=True)
class LayerChange:
    """Relaxation of one substrate layer (number 1 = the top layer).

    Heights and displacements in Angstrom; ``lateral_shift`` in (e1, e2) coordinates.
    """

    number: int
    atoms: int
    composition: dict
    height_ideal: float
    height: float
    dz: float
    buckling_ideal: float
    buckling: float
    lateral_shift: tuple[float, float]
    lateral_shift_norm: float
    lateral_rms: float
    species_dz: dict

    def to_dict(self) -> dict:
        return dict(self.__dict__)


@dataclass(frozen=True)
class SpacingChange:
    """Change of the spacing between layers ``upper`` and ``lower`` (``d12`` for 1 and 2)."""

    label: str
    upper: int
    lower: int
    ideal: float
    relaxed: float
    delta: float
    percent: float

    def to_dict(self) -> dict:
        return dict(self.__dict__)


@dataclass(frozen=True)
class AdsorbateChange:
    """Geometry of one adsorbate atom before and after relaxation (Angstrom)."""

    index: int
    symbol: str
    side: str
    height_ideal: float
    height: float
    displacement: tuple[float, float, float]
    lateral_shift: float
    site_ideal: str
    site: str
    bonds: list

    def to_dict(self) -> dict:
        return dict(self.__dict__)


@dataclass
class RelaxationReport:
    """Everything :func:`analyse_relaxation` found; ``to_dict`` for JSON, ``table`` for people."""

    atoms: int
    method: str
    order: np.ndarray
    displacements: np.ndarray
    layers: list[LayerChange]
    spacings: list[SpacingChange]
    adsorbates: list[AdsorbateChange]
    max_displacement: float
    max_displacement_atom: int
    rms_displacement: float
    drift: tuple[float, float, float]
    fixed_atoms: int
    fixed_max_displacement: float | None
    heights_ideal: np.ndarray
    adsorbate_mask: np.ndarray
    notes: list[str] = field(default_factory=list)

    def to_dict(self, atoms_detail: bool = True) -> dict:
        d = {
            "atoms": self.atoms,
            "matching": self.method,
            "frame": "heights along n = a1 x a2; lateral components along e1 = a1/|a1| and e2 = n x e1",
            "units": "Angstrom; percent of the reference spacing",
            "max_displacement": self.max_displacement,
            "max_displacement_atom": self.max_displacement_atom,
            "rms_displacement": self.rms_displacement,
            "drift": list(self.drift),
            "fixed_atoms": self.fixed_atoms,
            "fixed_max_displacement": self.fixed_max_displacement,
            "layers": [x.to_dict() for x in self.layers],
            "spacings": [x.to_dict() for x in self.spacings],
            "adsorbates": [x.to_dict() for x in self.adsorbates],
            "notes": list(self.notes),
        }
        if atoms_detail:
            d["relaxed_index_of_reference_atom"] = self.order.tolist()
            d["displacements"] = self.displacements.tolist()
        return d

    def table(self) -> str:
        """Plain-text tables of layers, spacings and adsorbates."""
        out = [
            f"{self.atoms} atoms matched by {self.method}; "
            f"largest displacement {self.max_displacement:.3f} A "
            f"(atom {self.max_displacement_atom}), rms {self.rms_displacement:.3f} A",
        ]
        if self.fixed_atoms:
            out.append(f"{self.fixed_atoms} fixed atoms moved at most {self.fixed_max_displacement:.2e} A")
        out.append("")
        out.append(f"{'layer':>5} {'atoms':>5} {'height':>9} {'dz':>8} {'buckling':>9} {'lateral':>8}"
                   "  composition")
        for x in self.layers:
            comp = " ".join(f"{k}{v}" for k, v in x.composition.items())
            out.append(f"{x.number:>5} {x.atoms:>5} {x.height:9.4f} {x.dz:+8.4f} {x.buckling:9.4f} "
                       f"{x.lateral_shift_norm:8.4f}  {comp}")
        if self.spacings:
            out.append("")
            out.append(f"{'pair':>5} {'ideal':>8} {'relaxed':>8} {'change':>8} {'%':>7}")
            for s in self.spacings:
                out.append(f"{s.label:>5} {s.ideal:8.4f} {s.relaxed:8.4f} {s.delta:+8.4f} {s.percent:+7.2f}")
        if self.adsorbates:
            out.append("")
            out.append(f"{'atom':>5} {'el':>3} {'side':>6} {'height':>8} {'ideal':>8} {'shift':>7}"
                       "  site (ideal -> relaxed); nearest bonds")
            for a in self.adsorbates:
                bonds = ", ".join(f"{b['symbol']}{b['atom']} {b['length']:.3f}" for b in a.bonds[:4])
                out.append(f"{a.index:>5} {a.symbol:>3} {a.side:>6} {a.height:8.4f} {a.height_ideal:8.4f} "
                           f"{a.lateral_shift:7.4f}  {a.site_ideal} -> {a.site}; {bonds}")
        for n in self.notes:
            out.append(f"note: {n}")
        return "\n".join(out)


def _lateral_nearest(points: np.ndarray, layer_xy: np.ndarray, lattice: np.ndarray, k: int) -> np.ndarray:
    """Sorted lateral distances (N, <=k) from ``points`` to the nearest atoms of a layer (periodic)."""
    from scipy.spatial import cKDTree

    _, img = _images(layer_xy, lattice)
    k = min(k, len(img))
    wrapped, _ = _images(points, lattice)
    dist, _ = cKDTree(img).query(wrapped, k=k)
    return np.asarray(dist, dtype=float).reshape(len(points), k)


def _layer_nn(lat_xy: np.ndarray, lattice: np.ndarray) -> float:
    """Shortest lateral distance between atoms of one layer (periodic images included)."""
    from scipy.spatial import cKDTree

    red = Lattice2D(lattice).reduced()[0].vectors
    best = float(np.linalg.norm(red[0]))  # an atom and its own image
    if len(lat_xy) > 1:
        wrapped, img = _images(lat_xy, lattice)
        dist, _ = cKDTree(img).query(wrapped, k=2)
        best = min(best, float(dist[:, 1].min()))
    return best


def analyse_relaxation(reference, relaxed, *, method: str = "auto", adsorbates=None,
                       layer_tol: float | None = None, max_displacement: float = MAX_DISPLACEMENT,
                       cell_tol: float = CELL_TOL, bond_tol: float = 0.15) -> RelaxationReport:
    """Compare a relaxed slab with its reference, layer by layer and adsorbate by adsorbate.

    Parameters
    ----------
    reference : ase.Atoms
        The ideal slab (bulk-terminated or the model before relaxation). Its layers define
        the layers of the analysis. Metadata in ``reference.info["surfgeo"]`` (bulk
        species, layer spacing, relaxation records) is used when present.
    relaxed : ase.Atoms
        The relaxed slab: same atoms, any order, possibly wrapped across the cell.
    method : {"auto", "index", "distance"}
        How to match atoms; see :func:`match_atoms`.
    adsorbates : None, "none", sequence of str or int, optional
        Which atoms are adsorbates; see :func:`find_adsorbates`.
    layer_tol : float, optional
        Height tolerance for layers (Angstrom); by default
        :func:`surfgeo.slab.constraints.default_layer_tol`.
    max_displacement : float
        Refuse if any atom moved further (Angstrom): the structures are then probably
        not the same system, or the surface reconstructed.
    cell_tol : float
        Tolerance on the in-plane cell vector lengths (Angstrom).
    bond_tol : float
        Substrate neighbours of an adsorbate within ``(1 + bond_tol)`` times the shortest
        bond are listed as its bonds.

    Returns
    -------
    RelaxationReport

    Notes
    -----
    Layer heights are mean heights of the layer's atoms; ``Delta d_ij`` is the change of
    the difference of mean heights of consecutive layers; buckling is the peak-to-peak
    height spread within a layer; the lateral shift is the mean in-plane displacement.
    Site labels are geometric: the number of outermost-layer atoms at (nearly) the
    smallest lateral distance, with hcp and fcc hollows told apart by an atom directly
    below in the second or third layer (ABC stacking rule).
    """
    from surfgeo.slab.constraints import default_layer_tol, fixed_mask

    max_displacement = positive_number(max_displacement, "the largest allowed displacement", "distance")
    match = match_atoms(reference, relaxed, method, cell_tol)
    d = match.displacements
    n = len(reference)
    fref = SurfaceFrame.of(reference.cell)
    p = match.reference_local
    q = p + d  # relaxed positions, unwrapped, in the reference frame and order
    norms = np.linalg.norm(d, axis=1)
    worst = int(np.argmax(norms)) if n else 0
    if n and norms[worst] > max_displacement:
        raise StructureError(
            f"atom {worst} ({reference[worst].symbol}) moved {norms[worst]:.2f} A, more than the "
            f"{max_displacement:g} A allowed; the two structures are probably not the same system "
            "(raise the limit if the surface really changed that much)."
        )
    tol = default_layer_tol(reference) if layer_tol is None else float(layer_tol)
    symbols = np.array(reference.get_chemical_symbols())
    ads = find_adsorbates(reference, p[:, 2], adsorbates, tol)
    sub_idx = np.nonzero(~ads)[0]
    notes = [match.note] if match.note else []
    layers_bottom_up = [sub_idx[g] for g in group_layers(p[sub_idx, 2], tol)] if len(sub_idx) else []
    layers = layers_bottom_up[::-1]  # number 1 = top

    lay_out: list[LayerChange] = []
    for k, idx in enumerate(layers, 1):
        dl = d[idx]
        comp = dict(sorted(Counter(symbols[idx].tolist()).items()))
        species_dz = {s: float(dl[symbols[idx] == s, 2].mean()) for s in comp} if len(comp) > 1 else {}
        shift = dl[:, :2].mean(axis=0)
        lay_out.append(LayerChange(
            number=k, atoms=int(len(idx)), composition=comp,
            height_ideal=float(p[idx, 2].mean()), height=float(q[idx, 2].mean()), dz=float(dl[:, 2].mean()),
            buckling_ideal=float(np.ptp(p[idx, 2])), buckling=float(np.ptp(q[idx, 2])),
            lateral_shift=(float(shift[0]), float(shift[1])), lateral_shift_norm=float(np.hypot(*shift)),
            lateral_rms=float(np.sqrt((dl[:, :2] ** 2).sum(axis=1).mean())),
            species_dz=species_dz,
        ))
    spacings = []
    for a, b in zip(lay_out[:-1], lay_out[1:], strict=True):
        ideal = a.height_ideal - b.height_ideal
        rel = a.height - b.height
        spacings.append(SpacingChange(
            label=f"d{a.number}{b.number}" if b.number < 10 else f"d{a.number},{b.number}",
            upper=a.number, lower=b.number, ideal=float(ideal), relaxed=float(rel),
            delta=float(rel - ideal), percent=float(100.0 * (rel - ideal) / ideal),
        ))
    meta = reference.info.get("surfgeo")
    if isinstance(meta, dict) and meta.get("relaxations"):
        notes.append("the reference itself carries relaxation records, so percentages are relative to its "
                     "spacings, not to the bulk.")

    ads_out = _adsorbate_changes(reference, np.nonzero(ads)[0], layers, p, q, d, fref.lattice, bond_tol)

    fixed = fixed_mask(reference) | fixed_mask(relaxed)[match.order]
    return RelaxationReport(
        atoms=n, method=match.method, order=match.order, displacements=d,
        layers=lay_out, spacings=spacings, adsorbates=ads_out,
        max_displacement=float(norms[worst]) if n else 0.0, max_displacement_atom=worst,
        rms_displacement=float(np.sqrt((norms ** 2).mean())) if n else 0.0,
        drift=tuple(float(x) for x in d.mean(axis=0)) if n else (0.0, 0.0, 0.0),
        fixed_atoms=int(fixed.sum()),
        fixed_max_displacement=float(norms[fixed].max()) if fixed.any() else None,
        heights_ideal=p[:, 2].copy(), adsorbate_mask=ads, notes=notes,
    )


#: Candidate substrate neighbours examined per adsorbate atom when listing bonds.
BOND_CANDIDATES = 16


def _adsorbate_changes(reference, ads_idx, layers, p, q, d, lattice, bond_tol) -> list[AdsorbateChange]:
    """Heights, bonds and sites of the adsorbate atoms (vectorised over adsorbates per face)."""
    from scipy.spatial import cKDTree

    if len(ads_idx) == 0 or not layers:
        return []
    symbols = reference.get_chemical_symbols()
    h_top, h_bottom = p[layers[0], 2].mean(), p[layers[-1], 2].mean()
    hz = p[ads_idx, 2]
    side = np.where(hz >= h_top, "top", np.where(hz <= h_bottom, "bottom", "inside"))

    # bonds: nearest substrate atoms in the relaxed structure, through a tree of periodic images
    sub = np.concatenate(layers)
    k = min(BOND_CANDIDATES, 9 * len(sub))
    sub_w, sub_img = _images(q[sub, :2], lattice)
    tree = cKDTree(np.column_stack([sub_img, np.tile(q[sub, 2], 9)]))
    ads_w, _ = _images(q[ads_idx, :2], lattice)
    dist, idx = tree.query(np.column_stack([ads_w, q[ads_idx, 2]]), k=k)
    dist, idx = dist.reshape(len(ads_idx), k), idx.reshape(len(ads_idx), k) % len(sub)

    sites: dict[str, np.ndarray] = {"ideal": np.empty(len(ads_idx), dtype=object),
                                    "relaxed": np.empty(len(ads_idx), dtype=object)}
    outer_height = {"ideal": np.empty(len(ads_idx)), "relaxed": np.empty(len(ads_idx))}
    sign = np.where(side == "bottom", -1.0, 1.0)
    for face in ("top", "bottom", "inside"):
        sel = np.nonzero(side == face)[0]
        if not len(sel):
            continue
        order = layers if face != "bottom" else layers[::-1]
        lay = [order[s] if s < len(order) else None for s in range(3)]
        a_nn = _layer_nn(p[lay[0], :2], lattice)
        for name, pos in (("ideal", p), ("relaxed", q)):
            at = pos[ads_idx[sel], :2]
            rho = [None if L is None else _lateral_nearest(at, pos[L, :2], lattice, 6 if s == 0 else 1)
                   for s, L in enumerate(lay)]
            for r, j in enumerate(sel):
                sites[name][j] = _site_label(*(None if x is None else x[r] for x in rho), a_nn)
            outer_height[name][sel] = pos[lay[0], 2].mean()

    out = []
    for j, i in enumerate(ads_idx):
        keep = dist[j] <= dist[j, 0] * (1.0 + bond_tol)
        # in small cells one atom can be bonded through several periodic images: each is a bond
        bonds = [{"atom": int(a), "symbol": symbols[a], "length": float(r)}
                 for a, r in zip(sub[idx[j, keep]], dist[j, keep], strict=True)]
        out.append(AdsorbateChange(
            index=int(i), symbol=symbols[i], side=str(side[j]),
            height_ideal=float(sign[j] * (p[i, 2] - outer_height["ideal"][j])),
            height=float(sign[j] * (q[i, 2] - outer_height["relaxed"][j])),
            displacement=tuple(float(x) for x in d[i]),
            lateral_shift=float(np.hypot(d[i, 0], d[i, 1])),
            site_ideal=str(sites["ideal"][j]), site=str(sites["relaxed"][j]), bonds=bonds,
        ))
    return out


__all__ = [
    "AdsorbateChange",
    "CELL_TOL",
    "LayerChange",
    "MAX_DISPLACEMENT",
    "Matching",
    "RelaxationReport",
    "SpacingChange",
    "SurfaceFrame",
    "analyse_relaxation",
    "check_same_system",
    "find_adsorbates",
    "match_atoms",
]
