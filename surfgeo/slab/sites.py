"""High-symmetry adsorption sites of any surface, found from the geometry alone.

No per-face tables: the sites come from a triangulation of the outermost substrate atoms,
so the same code works on low-index, stepped and reconstructed faces.

How the sites are found
-----------------------
1. **Surface atoms.** The nearest-neighbour distance d is the median distance of each
   substrate atom to its nearest neighbour; the coordination number (CN) counts neighbours
   closer than 1.25 d. If the top atomic layer is dense (area per atom at most
   ``1.5 d^2``: fcc(111), (100), (110), bcc(110), (100), hcp(0001) ...) the top layer
   alone forms the sites ("dense" mode). Otherwise the face is open or stepped and every
   atom that misses neighbours on the vacuum side (CN below the slab's largest CN, and the
   sum of its bond vectors pointing down) takes part ("open" mode); these atoms are
   labelled step edge (lowest CN), step bottom (highest CN) and terrace (in between).
2. **Sites.** The surface atoms, projected on the surface plane with their periodic images,
   are triangulated (Delaunay). Every atom is a *top* site, every edge no longer than
   1.5 d a *bridge*, every triangle a threefold *hollow* at its centroid. Two triangles whose
   circumcentres coincide (their four atoms lie on one circle: a square or a rectangle,
   also a square step facet seen in projection) form one *fourfold hollow*.
3. **fcc or hcp.** A threefold hollow of a close-packed triangle (all edges within 10% of
   d) sits above a second-layer atom (a tetrahedral hole: *hcp hollow*) when an atom lies
   a tetrahedron height d sqrt(2/3) below its centroid along the triangle normal, and
   above an octahedral hole (*fcc hollow*) otherwise: the ABC stacking rule in geometric
   form. Other triangles give a plain *threefold hollow*.
4. **Classes.** Sites with the same kind and the same surroundings (sorted distances to
   the nearest atoms of every species, within ``tol``) form one class; its multiplicity is
   the number of such sites per cell. Bridges of different lengths are told apart as
   *short* and *long* bridges.
5. **Local symmetry.** For one site of each class the rotations (2, 3, 4, 6-fold) about
   the surface normal through the site and the vertical mirror planes through it that map
   all atoms within 2.5 d onto atoms of the same species are collected, giving the site's
   point group (``1``, ``m``, ``2``, ``2mm``, ``3``, ``3m``, ``4``, ``4mm``, ``6``,
   ``6mm``).

Classes, names and symmetry are those of the substrate alone (adsorbates and films are left
out), so a site keeps its name when other adsorbates are added. Sites already taken (an
adsorbate or film atom above the site, laterally within 0.2 d) are then left out of their
class; a class whose sites are all taken disappears.

References
----------
.. [1] B. Delaunay, "Sur la sphere vide", Bull. Acad. Sci. URSS 6, 793 (1934); the
   triangulation is scipy.spatial.Delaunay (Qhull: C. B. Barber, D. P. Dobkin and
   H. Huhdanpaa, ACM Trans. Math. Softw. 22, 469 (1996)).
.. [2] J. H. Montoya and K. A. Persson, "A high-throughput framework for determining
   adsorption energies on solid surfaces", npj Comput. Mater. 3, 14 (2017) (sites from a
   Delaunay triangulation of the surface atoms).
.. [3] B. Lang, R. W. Joyner and G. A. Somorjai, Surf. Sci. 30, 440 (1972) (terraces and
   steps of vicinal faces).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np
from scipy.spatial import Delaunay, cKDTree

from surfgeo.errors import StructureError
from surfgeo.slab.layers import LAYER_TOL, group_layers
from surfgeo.slab.supercell import ADSORBATE_KEY, SUBLATTICE_KEY, slab_cell2d

#: Neighbour cut-off for coordination numbers, in units of the nearest-neighbour distance.
CN_CUTOFF = 1.25
#: Largest area per top-layer atom (units of d^2) for which the top layer alone forms the sites.
DENSE_AREA = 1.5
#: Longest bridge (units of d).
MAX_BRIDGE = 1.5
#: Relative tolerance on edge lengths for close-packed triangles and for bridge lengths.
LENGTH_RTOL = 0.10
#: Circumcentres closer than this (units of d) make two triangles one fourfold hollow.
CONCYCLIC_TOL = 0.05
#: Radius of the environment used for the local symmetry (units of d).
ENV_RADIUS = 2.5

KINDS = ("top", "bridge", "hollow")
_KIND_ORDER = {k: i for i, k in enumerate(KINDS)}
_REGION_ORDER = {"": 0, "step-edge": 1, "terrace": 2, "step-bottom": 3, "step": 4}
_VARIANT_ORDER = {"": 0, "short": 1, "long": 2, "fcc": 3, "hcp": 4, "fourfold": 5, "threefold": 6}


@dataclass(frozen=True, eq=False)
class SiteClass:
    """A class of equivalent adsorption sites.

    Attributes
    ----------
    name : str
        Unique name on this slab: ``top``, ``bridge``, ``short-bridge``, ``long-bridge``,
        ``fcc-hollow``, ``hcp-hollow``, ``fourfold-hollow``, ``threefold-hollow``, on open
        and stepped faces prefixed by the region (``step-edge-``, ``terrace-``,
        ``step-bottom-``, ``step-`` for sites that join the edge and the bottom of a step),
        with ``-2``, ``-3`` ... when several inequivalent classes would share a name.
    kind : str
        ``top``, ``bridge`` or ``hollow``.
    variant : str
        ``short``/``long`` (bridges, where lengths differ), ``fcc``/``hcp``/``fourfold``/
        ``threefold`` (hollows), else empty.
    region : str
        Empty on dense faces; ``step-edge``, ``terrace``, ``step-bottom`` or ``step``.
    symmetry : str
        Local point group of the site (rotations about the normal, vertical mirrors).
    positions : ndarray, shape (m, 3)
        Cartesian positions (Angstrom): lateral site position, z = mean height of the atoms
        forming the site.
    fractional : ndarray, shape (m, 2)
        The same in fractional coordinates of the slab's in-plane cell, in [0, 1).
    members : ndarray of int, shape (m, k)
        Indices (into the slab) of the k = 1, 2, 3 or 4 atoms forming each site.
    bond : float
        Mean distance (Angstrom) between the forming atoms (bridges and hollows), 0 for top.
    """

    name: str
    kind: str
    variant: str
    region: str
    symmetry: str
    positions: np.ndarray
    fractional: np.ndarray
    members: np.ndarray
    bond: float

    @property
    def multiplicity(self) -> int:
        """Number of sites of this class per cell of the slab."""
        return int(len(self.positions))

    def to_dict(self) -> dict:
        return {
            "name": self.name,
            "kind": self.kind,
            "variant": self.variant,
            "region": self.region,
            "symmetry": self.symmetry,
            "multiplicity": self.multiplicity,
            "bond": self.bond,
            "positions": self.positions.tolist(),
            "fractional": self.fractional.tolist(),
            "members": self.members.tolist(),
        }


@dataclass(frozen=True, eq=False)
class SurfaceSites:
    """All site classes of a slab (see :func:`find_sites`).

    Attributes
    ----------
    classes : tuple of SiteClass
        Ordered top, bridge, hollow; within a kind by region and variant.
    mode : str
        ``"dense"`` (top layer only) or ``"open"`` (all exposed atoms).
    nn_distance : float
        Nearest-neighbour distance d of the substrate (Angstrom).
    surface_atoms : ndarray of int
        Indices of the atoms that form the sites.
    atom_regions : dict
        For open faces, ``{"step-edge": [...], "terrace": [...], "step-bottom": [...]}``
        atom indices; empty on dense faces.
    """

    classes: tuple[SiteClass, ...]
    mode: str
    nn_distance: float
    surface_atoms: np.ndarray
    atom_regions: dict = field(default_factory=dict)

    @property
    def names(self) -> list[str]:
        return [c.name for c in self.classes]

    def __iter__(self):
        return iter(self.classes)

    def __len__(self) -> int:
        return len(self.classes)

    def get(self, name: str) -> SiteClass:
        """The class called ``name``; a :class:`StructureError` lists the valid names."""
        for c in self.classes:
            if c.name == name:
                return c
        raise StructureError(
            f"there is no site {name!r} on this surface; the sites are: {', '.join(self.names)}."
        )

    def __getitem__(self, name: str) -> SiteClass:
        return self.get(name)

    def to_dict(self) -> dict:
        return {
            "mode": self.mode,
            "nn_distance": self.nn_distance,
            "surface_atoms": self.surface_atoms.tolist(),
            "atom_regions": {k: list(map(int, v)) for k, v in self.atom_regions.items()},
            "sites": [c.to_dict() for c in self.classes],
        }

    def table(self) -> str:
        """A plain-text table: name, symmetry, multiplicity, first position."""
        lines = [f"{'site':<26} {'symmetry':>8} {'per cell':>8}   first position x, y, z (A)"]
        for c in self.classes:
            x, y, z = c.positions[0]
            lines.append(f"{c.name:<26} {c.symmetry:>8} {c.multiplicity:>8}   {x:8.3f} {y:8.3f} {z:8.3f}")
        return "\n".join(lines)


# ---------------------------------------------------------------------------- geometry helpers
class PeriodicImages:
    """Atoms of a slab with their lateral periodic images near the home cell.

    Parameters
    ----------
    pos : ndarray, shape (N, 3)
        Cartesian positions (Angstrom).
    numbers : ndarray, shape (N,)
        Atomic numbers.
    A : ndarray, shape (2, 2)
        In-plane cell rows (Angstrom).
    pad : float
        Images are kept within this lateral distance (Angstrom) of the home cell.

    Attributes
    ----------
    home : ndarray (N, 3)
        The atoms wrapped laterally into the home cell (fractional coordinates in [0, 1)).
    xyz : ndarray (K, 3)
        Home atoms first (in order), then the images.
    index : ndarray (K,)
        Atom index of each point of ``xyz``.
    numbers : ndarray (K,)
    tree : scipy.spatial.cKDTree
        Tree over ``xyz``.
    """

    def __init__(self, pos: np.ndarray, numbers: np.ndarray, A: np.ndarray, pad: float):
        self.A = A
        self.Ainv = np.linalg.inv(A)
        frac = pos[:, :2] @ self.Ainv
        frac -= np.floor(frac + 1e-9)  # atoms on a cell edge stay at 0, not 1 - 1e-17 -> 1
        home = pos.copy()
        home[:, :2] = frac @ A
        area = abs(float(np.linalg.det(A)))
        h = np.array([area / np.linalg.norm(A[1]), area / np.linalg.norm(A[0])])  # widths
        p = pad / h
        n = np.ceil(p).astype(int)
        shifts = np.array(
            [(i, j) for i in range(-n[0], n[0] + 1) for j in range(-n[1], n[1] + 1)], dtype=float
        )
        # home copies first, so that image index i < len(pos) is the atom itself
        shifts = shifts[np.lexsort((np.abs(shifts).sum(axis=1) > 0,))]
        allf = (frac[None, :, :] + shifts[:, None, :]).reshape(-1, 2)
        idx = np.tile(np.arange(len(pos)), len(shifts))
        keep = np.all((allf > -p - 1e-9) & (allf < 1 + p + 1e-9), axis=1)
        self.index = idx[keep]
        xyz = np.empty((int(keep.sum()), 3))
        xyz[:, :2] = allf[keep] @ A
        xyz[:, 2] = pos[self.index, 2]
        self.xyz = xyz
        self.numbers = numbers[self.index]
        self.home = home
        self.tree = cKDTree(xyz)

    def frac(self, xy: np.ndarray) -> np.ndarray:
        return np.asarray(xy)[:, :2] @ self.Ainv


def nn_distance(pos: np.ndarray, A: np.ndarray) -> float:
    """Nearest-neighbour distance (Angstrom): the median over atoms of the distance to the
    nearest other atom or periodic image, for atoms at ``pos`` in the in-plane cell ``A``."""
    if len(pos) < 1:
        raise StructureError("the slab has no substrate atoms to find sites on.")
    reach = 1.01 * float(np.linalg.norm(A, axis=1).max()) + float(np.ptp(pos[:, 2]))
    per = PeriodicImages(pos, np.zeros(len(pos), int), A, reach)
    d, _ = per.tree.query(per.home, k=2)
    dn = d[:, 1]
    dn = dn[dn > 1e-6]
    if len(dn) == 0:  # pragma: no cover - only coincident atoms
        raise StructureError("all substrate atoms coincide; cannot find a nearest-neighbour distance.")
    return float(np.median(dn))


def _point_group_symbol(order: int, mirrors: int) -> str:
    if mirrors == 0:
        return str(order)
    if order == 1:
        return "m"
    return f"{order}mm" if order in (2, 4, 6) else f"{order}m"


def _site_symmetry(
    point: np.ndarray, per: PeriodicImages, numbers: np.ndarray, radius: float, tol: float
) -> str:
    """Point group of the vertical axis through ``point`` from the atoms within ``radius``."""
    idx = per.tree.query_ball_point(point, radius)
    env = per.xyz[idx] - point
    spec = numbers[idx]
    if len(env) == 0:
        return "1"
    big = per.tree.query_ball_point(point, radius + 4 * tol + 0.5)
    ref = per.xyz[big] - point
    ref_spec = numbers[big]
    ref_tree = cKDTree(ref)

    def maps(R: np.ndarray) -> bool:
        moved = env.copy()
        moved[:, :2] = env[:, :2] @ R.T
        d, j = ref_tree.query(moved)
        return bool(np.all(d <= tol) and np.all(ref_spec[j] == spec))

    def rot(t: float) -> np.ndarray:
        c, s = math.cos(t), math.sin(t)
        return np.array([[c, -s], [s, c]])

    order = 1
    for n in (6, 4, 3, 2):
        if maps(rot(2 * math.pi / n)):
            order = n
            break
    # candidate mirror lines: through an atom of the nearest ring, or bisecting two of them
    lat = np.hypot(env[:, 0], env[:, 1])
    ring = lat > 1e-3
    if not np.any(ring):
        return _point_group_symbol(order, 0)
    rmin = lat[ring].min()
    near = ring & (lat < rmin + 0.2 + tol)
    ang = np.arctan2(env[near, 1], env[near, 0])
    cands = list(ang) + [(a + b) / 2 for i, a in enumerate(ang) for b in ang[i + 1:]]
    cands = np.mod(np.array(cands), math.pi)
    cands = np.unique(np.round(cands, 6))
    found: list[float] = []
    for t in cands:
        c, s = math.cos(2 * t), math.sin(2 * t)
        if maps(np.array([[c, s], [s, -c]])):
            if all(min(abs(t - f), math.pi - abs(t - f)) > 1e-4 for f in found):
                found.append(float(t))
    return _point_group_symbol(order, len(found))


def _cluster_rows(rows: np.ndarray, keys: np.ndarray, tol: float) -> np.ndarray:
    """Class label of each row: equal key and all entries within ``tol`` of a class representative."""
    labels = np.full(len(rows), -1, dtype=int)
    reps: list[int] = []
    for i in range(len(rows)):
        if labels[i] >= 0:
            continue
        lab = len(reps)
        reps.append(i)
        same = (keys == keys[i]) & (labels < 0) & np.all(np.abs(rows - rows[i]) <= tol, axis=1)
        labels[same] = lab
    return labels


# ---------------------------------------------------------------------------- the finder
def find_sites(
    atoms,
    mode: str = "auto",
    tol: float = 0.05,
    substrate=None,
    include_occupied: bool = False,
) -> SurfaceSites:
    """Find the high-symmetry adsorption sites of the top (+z) surface of a slab.

    Parameters
    ----------
    atoms : ase.Atoms
        A slab: a1, a2 in the xy-plane, +z pointing into the vacuum.
    mode : {"auto", "dense", "open"}
        ``dense`` uses the top atomic layer only, ``open`` every atom exposed to the vacuum
        with step regions; ``auto`` chooses from the packing of the top layer (see module
        docstring).
    tol : float
        Distance tolerance (Angstrom) for telling sites apart and for symmetry.
    substrate : array_like of bool, optional
        Which atoms belong to the substrate. Default: every atom that is not an adsorbate
        (per-atom array ``surfgeo_adsorbate``) or an overlayer film (``surfgeo_sublattice``).
    include_occupied : bool
        Keep sites with an adsorbate directly above them.

    Returns
    -------
    SurfaceSites

    Raises
    ------
    StructureError
        If the slab has no substrate atoms or ``mode`` is unknown.

    Examples
    --------
    >>> from ase.build import fcc111
    >>> find_sites(fcc111("Pt", (1, 1, 4), vacuum=6.0)).names
    ['top', 'bridge', 'fcc-hollow', 'hcp-hollow']

    References
    ----------
    See the module docstring.
    """
    if mode not in ("auto", "dense", "open"):
        raise StructureError(f"site finding mode must be 'auto', 'dense' or 'open', got {mode!r}.")
    A = slab_cell2d(atoms)
    n_all = len(atoms)
    if substrate is None:
        mask = np.ones(n_all, dtype=bool)
        for key in (ADSORBATE_KEY, SUBLATTICE_KEY):
            if key in atoms.arrays:
                mask &= np.asarray(atoms.arrays[key]) == 0
    else:
        mask = np.asarray(substrate, dtype=bool)
        if mask.shape != (n_all,):
            raise StructureError(f"substrate mask must have one entry per atom ({n_all}).")
    sub_idx = np.nonzero(mask)[0]
    if len(sub_idx) == 0:
        raise StructureError("the slab has no substrate atoms to find sites on.")
    pos_all = np.asarray(atoms.positions, dtype=float)
    num_all = np.asarray(atoms.numbers)
    pos = pos_all[sub_idx]
    d = nn_distance(pos, A)
    pad = 4.0 * d
    sub = PeriodicImages(pos, num_all[sub_idx], A, pad)
    area = abs(float(np.linalg.det(A)))

    # coordination numbers and the direction of missing neighbours
    r_cn = CN_CUTOFF * d
    cn = sub.tree.query_ball_point(sub.home, r_cn, return_length=True) - 1
    layers = group_layers(pos[:, 2], LAYER_TOL)
    top = layers[-1]
    if mode == "auto":
        mode = "dense" if area / len(top) <= DENSE_AREA * d * d else "open"
    regions_of_atom = np.full(len(pos), "", dtype=object)
    atom_regions: dict[str, np.ndarray] = {}
    if mode == "dense":
        surf = np.sort(top)
    else:
        cand = np.nonzero(cn < cn.max())[0]
        if len(cand) == 0:
            surf = np.sort(top)
        else:
            ctree = cKDTree(sub.home[cand])
            sdm = ctree.sparse_distance_matrix(sub.tree, r_cn, output_type="ndarray")
            dz = sub.xyz[sdm["j"], 2] - sub.home[cand[sdm["i"]], 2]
            sz = np.bincount(sdm["i"], weights=dz, minlength=len(cand))
            surf = np.sort(cand[sz < -0.1 * d])
            if len(surf) == 0:
                surf = np.sort(top)
        levels = np.unique(cn[surf])
        if len(levels) > 1:
            lab = np.where(cn[surf] == levels[0], "E", np.where(cn[surf] == levels[-1], "B", "T"))
            regions_of_atom[surf] = lab
            names = {"E": "step-edge", "T": "terrace", "B": "step-bottom"}
            for key, nm in names.items():
                sel = surf[lab == key]
                if len(sel):
                    atom_regions[nm] = sub_idx[sel]

    # periodic images of the surface atoms and their triangulation
    sp = PeriodicImages(pos[surf], num_all[sub_idx][surf], A, pad)
    local_to_sub = surf[sp.index]  # image -> substrate index
    xyz = sp.xyz
    if len(np.unique(np.round(xyz[:, :2], 6), axis=0)) < 3:
        raise StructureError("too few surface atoms to triangulate; the slab cell is degenerate.")
    tri = Delaunay(xyz[:, :2])
    simp = tri.simplices
    p2 = xyz[simp][:, :, :2]
    # circumcentres
    ax, ay = p2[:, 0, 0], p2[:, 0, 1]
    bx, by = p2[:, 1, 0], p2[:, 1, 1]
    cx, cy = p2[:, 2, 0], p2[:, 2, 1]
    den = 2 * (ax * (by - cy) + bx * (cy - ay) + cx * (ay - by))
    ok = np.abs(den) > 1e-12
    den = np.where(ok, den, 1.0)
    ux = ((ax**2 + ay**2) * (by - cy) + (bx**2 + by**2) * (cy - ay) + (cx**2 + cy**2) * (ay - by)) / den
    uy = ((ax**2 + ay**2) * (cx - bx) + (bx**2 + by**2) * (ax - cx) + (cx**2 + cy**2) * (bx - ax)) / den
    cc = np.column_stack([ux, uy])
    nb = tri.neighbors
    t_idx = np.repeat(np.arange(len(simp)), 3)
    u_idx = nb.ravel()
    sel = (u_idx > t_idx) & ok[t_idx] & ok[np.maximum(u_idx, 0)]
    t_idx, u_idx = t_idx[sel], u_idx[sel]
    close = np.linalg.norm(cc[t_idx] - cc[u_idx], axis=1) < CONCYCLIC_TOL * d
    partner = np.full(len(simp), -1)
    for t, u in zip(t_idx[close], u_idx[close], strict=True):
        if partner[t] < 0 and partner[u] < 0:
            partner[t], partner[u] = u, t

    # ---- hollow sites
    quads_t = np.nonzero((partner >= 0) & (np.arange(len(simp)) < partner))[0]
    quad_verts = []
    diag = set()
    for t in quads_t:
        u = partner[t]
        a, b = set(simp[t]), set(simp[u])
        shared = a & b
        diag.add(tuple(sorted(shared)))
        quad_verts.append(sorted(a | b))
    quad_verts = np.array(quad_verts, dtype=int).reshape(-1, 4)
    tri_only = np.nonzero(partner < 0)[0]
    tri_verts = np.sort(simp[tri_only], axis=1)

    sites_kind: list[str] = []
    sites_variant: list[str] = []
    sites_xyz: list[np.ndarray] = []
    sites_members: list[np.ndarray] = []  # image indices
    sites_bond: list[float] = []

    def add(kind, variant, members_img, xy, bond):
        z = xyz[members_img, 2].mean(axis=1)
        pts = np.column_stack([xy, z])
        f = sp.frac(pts)
        inside = np.all(np.floor(f + 1e-9) == 0, axis=1)
        for k in np.nonzero(inside)[0]:
            sites_kind.append(kind)
            sites_variant.append(variant if isinstance(variant, str) else variant[k])
            sites_xyz.append(pts[k])
            sites_members.append(members_img[k])
            sites_bond.append(float(bond[k]))

    # top
    home_img = np.nonzero(np.arange(len(xyz)) < len(surf))[0]  # home copies come first
    add("top", "", home_img[:, None], xyz[home_img, :2], np.zeros(len(home_img)))
    # bridges
    edges = np.concatenate([simp[:, [0, 1]], simp[:, [1, 2]], simp[:, [0, 2]]])
    edges = np.unique(np.sort(edges, axis=1), axis=0)
    if diag:
        dg = np.array(sorted(diag), dtype=np.int64)
        nimg = np.int64(len(xyz))
        is_diag = np.isin(edges[:, 0].astype(np.int64) * nimg + edges[:, 1], dg[:, 0] * nimg + dg[:, 1])
        edges = edges[~is_diag]
    elen = np.linalg.norm(xyz[edges[:, 0]] - xyz[edges[:, 1]], axis=1)
    keep = elen <= MAX_BRIDGE * d
    edges, elen = edges[keep], elen[keep]
    add("bridge", "", edges, xyz[edges][:, :, :2].mean(axis=1), elen)
    # fourfold hollows
    if len(quad_verts):
        Q = xyz[quad_verts]
        qd = np.linalg.norm(Q[:, :, None, :] - Q[:, None, :, :], axis=3)
        qb = qd[:, [0, 0, 0, 1, 1, 2], [1, 2, 3, 2, 3, 3]].mean(axis=1)
        add("hollow", "fourfold", quad_verts, xyz[quad_verts][:, :, :2].mean(axis=1), qb)
    # threefold hollows: fcc / hcp by the stacking rule
    if len(tri_verts):
        P = xyz[tri_verts]
        e = np.stack([
            np.linalg.norm(P[:, 0] - P[:, 1], axis=1),
            np.linalg.norm(P[:, 1] - P[:, 2], axis=1),
            np.linalg.norm(P[:, 0] - P[:, 2], axis=1),
        ], axis=1)
        closep = np.all(np.abs(e - d) <= LENGTH_RTOL * d, axis=1)
        normal = np.cross(P[:, 1] - P[:, 0], P[:, 2] - P[:, 0])
        normal /= np.linalg.norm(normal, axis=1)[:, None]
        normal *= np.sign(normal[:, 2])[:, None]
        cen = P.mean(axis=1)
        probe = cen - normal * d * math.sqrt(2.0 / 3.0)
        dist, _ = sub.tree.query(probe)
        variant = np.where(closep, np.where(dist < 0.25 * d, "hcp", "fcc"), "threefold")
        add("hollow", variant, tri_verts, cen[:, :2], e.mean(axis=1))

    if not sites_xyz:  # pragma: no cover - there is always at least one top site
        raise StructureError("no sites found on this slab.")
    S = np.array(sites_xyz)
    kinds = np.array(sites_kind)
    variants = np.array(sites_variant)
    bonds = np.array(sites_bond)
    nmem = np.array([len(m) for m in sites_members])
    regions = []
    mixes = []
    for m in sites_members:
        labs = {regions_of_atom[local_to_sub[i]] for i in m}
        labs.discard("")
        mixes.append(len(labs))
        if not labs:
            regions.append("")
        elif "E" in labs and "B" in labs:
            regions.append("step")
        elif "E" in labs:
            regions.append("step-edge")
        elif "B" in labs:
            regions.append("step-bottom")
        else:
            regions.append("terrace")
    regions = np.array(regions)
    mixes = np.array(mixes)

    # sites taken by an adsorbate or film atom directly above; they are dropped after the
    # classes are formed, so that names and symmetry are those of the bare substrate
    free = np.ones(len(S), dtype=bool)
    if not include_occupied and not np.all(mask):
        per_other = PeriodicImages(pos_all[~mask], num_all[~mask], A, pad)
        ot = cKDTree(per_other.xyz[:, :2])
        dd, jj = ot.query(S[:, :2])
        above = per_other.xyz[jj, 2] > S[:, 2]
        free = ~((dd < 0.2 * d) & above)
    if not np.any(free):
        raise StructureError("every site of this slab is occupied by an adsorbate.")
    per_all = sub  # substrate atoms with images: the environment for equivalence and symmetry

    # fingerprints: K nearest distances to each species
    rows = []
    K = 8
    for z in np.unique(num_all[sub_idx]):
        pts = per_all.xyz[per_all.numbers == z]
        k = min(K, len(pts))
        dd, _ = cKDTree(pts).query(S, k=k)
        dd = np.asarray(dd).reshape(len(S), k)
        if k < K:
            dd = np.concatenate([dd, np.full((len(S), K - k), 1e6)], axis=1)
        rows.append(dd)
    rows = np.concatenate(rows, axis=1)
    keys = np.array([f"{k}|{v}|{r}|{n}" for k, v, r, n in zip(kinds, variants, regions, nmem, strict=True)])
    labels = _cluster_rows(rows, keys, tol)

    frac = sp.frac(S)
    frac -= np.floor(frac + 1e-9)
    frac[np.abs(frac) < 1e-9] = 0.0
    classes_raw = []
    for lab in range(labels.max() + 1):
        members = np.nonzero(labels == lab)[0]
        order = np.lexsort((np.round(frac[members, 1], 6), np.round(frac[members, 0], 6)))
        members = members[order]
        i0 = members[0]
        classes_raw.append({
            "kind": str(kinds[i0]),
            "variant": str(variants[i0]),
            "region": str(regions[i0]),
            "mix": int(mixes[i0]),
            "sites": members,
            "bond": float(bonds[members].mean()),
            "z": float(S[i0, 2]),
        })
    # short / long bridges
    blens = sorted({round(c["bond"], 3) for c in classes_raw if c["kind"] == "bridge"})
    clusters: list[float] = []
    for b in blens:
        if not clusters or b > clusters[-1] * (1 + LENGTH_RTOL / 2):
            clusters.append(b)
    if len(clusters) > 1:
        for c in classes_raw:
            if c["kind"] != "bridge":
                continue
            if c["bond"] < clusters[0] * (1 + LENGTH_RTOL / 2):
                c["variant"] = "short"
            elif c["bond"] >= clusters[-1] * (1 - 1e-9):
                c["variant"] = "long"
    classes_raw.sort(key=lambda c: (
        _KIND_ORDER[c["kind"]], _REGION_ORDER[c["region"]], _VARIANT_ORDER[c["variant"]],
        c["mix"], -len(c["sites"]), -round(c["z"], 3), tuple(np.round(frac[c["sites"][0]], 6)),
    ))
    used: dict[str, int] = {}
    classes = []
    env_r = ENV_RADIUS * d
    for c in classes_raw:
        base = c["kind"] if not c["variant"] else f"{c['variant']}-{c['kind']}"
        if c["region"]:
            base = f"{c['region']}-{base}"
        used[base] = used.get(base, 0) + 1
        name = base if used[base] == 1 else f"{base}-{used[base]}"
        sites = c["sites"][free[c["sites"]]]
        if len(sites) == 0:
            continue
        sym = _site_symmetry(S[sites[0]], per_all, per_all.numbers, env_r, max(tol, 1e-3))
        members = np.array([sub_idx[local_to_sub[sites_members[i]]] for i in sites], dtype=int)
        classes.append(SiteClass(
            name=name, kind=c["kind"], variant=c["variant"], region=c["region"], symmetry=sym,
            positions=S[sites].copy(), fractional=frac[sites].copy(), members=members, bond=c["bond"],
        ))
    return SurfaceSites(
        classes=tuple(classes), mode=mode, nn_distance=d, surface_atoms=sub_idx[surf],
        atom_regions=atom_regions,
    )


__all__ = ["KINDS", "PeriodicImages", "SiteClass", "SurfaceSites", "find_sites", "nn_distance"]
