"""Adsorbates: atoms and molecules placed on named sites or fractional positions.

An adsorbate is an element (``"O"``), a molecule known to ASE (``"CO"``, ``"NO"``, ``"O2"``,
``"C2H4"``, ... from ``ase.build.molecule``) or any ``ase.Atoms`` given by the user. One point
of it, the *anchor*, is put on the site:

* laterally on the site (a name from :func:`surfgeo.slab.sites.find_sites`, e.g.
  ``"fcc-hollow"``, or a fractional position in the slab's cell);
* vertically either ``height`` above the mean height of the surface atoms around the site,
  or at ``bond_length`` from the nearest substrate atoms: the lowest height at which no
  substrate atom is closer than the bond length, z = max_j (z_j + sqrt(b^2 - rho_j^2)) over
  the atoms j at lateral distance rho_j < b (for atoms of one height this is the elementary
  h = sqrt(b^2 - rho^2)).

Orientation of a molecule: the axis from the anchor to the centroid of the other atoms is
first turned to +z (upright: CO bound through C with O above); a molecule whose axis is not
defined (the anchor at its centre, e.g. ``anchor="C"`` for C2H4) keeps ASE's frame. Then it
is tilted by ``tilt`` degrees away from +z towards the in-plane direction ``azimuth``
(degrees from +x, the substrate a1, anticlockwise seen from the vacuum): R = Rz(azimuth) Ry(tilt).

Every adsorbate atom carries the molecule number in the per-atom array
``surfgeo_adsorbate`` (0 for the substrate), so that :func:`coverage` counts molecules per
1x1 cell after any later supercell, and the record ``atoms.info["surfgeo"]["adsorbates"]``
lists what was placed where.
"""

from __future__ import annotations

import math
from collections import Counter
from fractions import Fraction

import numpy as np

from surfgeo.errors import StructureError
from surfgeo.slab.bulk import CONTACT_FACTOR as _BULK_CONTACT_FACTOR
from surfgeo.slab.info import surface_info, update_surface_info
from surfgeo.slab.sites import PeriodicImages, find_sites
from surfgeo.slab.supercell import (
    ADSORBATE_KEY,
    ORIGIN_KEY,
    SHIFT_KEY,
    SUBLATTICE_KEY,
    copy_slab,
    slab_cell2d,
)

#: Two atoms closer than this fraction of the sum of their covalent radii overlap (the value of
#: :data:`surfgeo.slab.bulk.CONTACT_FACTOR`, shared with bulks and slabs).
CONTACT_FACTOR = _BULK_CONTACT_FACTOR


# ---------------------------------------------------------------------------- building blocks
def make_adsorbate(species) -> tuple:
    """The adsorbate as ``(ase.Atoms, label)``.

    Parameters
    ----------
    species : str or ase.Atoms
        A chemical symbol (``"O"``), a molecule name of ``ase.build.molecule`` (``"CO"``,
        ``"NO"``, ``"O2"``, ``"C2H4"``, ``"H2O"`` ...) or an Atoms object (copied).
    """
    from ase import Atoms
    from ase.data import chemical_symbols

    if isinstance(species, Atoms):
        if len(species) == 0:
            raise StructureError("the adsorbate structure has no atoms.")
        mol = species.copy()
        mol.set_cell(np.zeros((3, 3)))
        mol.pbc = False
        mol.info.pop("surfgeo_name", None)
        return mol, mol.get_chemical_formula(mode="hill")
    if not isinstance(species, str) or not species:
        raise StructureError(
            f"adsorbate species must be an element, a molecule name or Atoms, got {species!r}."
        )
    if species in chemical_symbols[1:]:
        return Atoms(species, positions=[(0.0, 0.0, 0.0)]), species
    import ase.collections
    from ase.build import molecule

    names = set(ase.collections.g2.names)
    if species in names:
        mol = molecule(species)
        mol.info["surfgeo_name"] = species
        return mol, species
    raise StructureError(
        f"unknown adsorbate {species!r}: give a chemical symbol (O, H, Cu ...) or a molecule name "
        "of ase.build.molecule (CO, NO, O2, C2H4, H2O, NH3, OH, CH3 ...)."
    )


def _anchor(mol, anchor) -> tuple[np.ndarray, np.ndarray]:
    """Anchor point and the indices of the atoms that define it."""
    n = len(mol)
    if anchor is None:
        if n == 1:
            return mol.positions[0].copy(), np.array([0])
        # named molecule: first atom of the first non-hydrogen element of the name (C in CO,
        # N in NO, O in H2O); a user structure: its first atom
        import re

        name = str(mol.info.get("surfgeo_name", ""))
        heavy = [e for e in re.findall(r"[A-Z][a-z]?", name) if e != "H"]
        symbols = mol.get_chemical_symbols()
        i0 = symbols.index(heavy[0]) if heavy and heavy[0] in symbols else 0
        return mol.positions[i0].copy(), np.array([i0])
    if isinstance(anchor, (int, np.integer)) and not isinstance(anchor, bool):
        if not 0 <= int(anchor) < n:
            raise StructureError(f"anchor index {anchor} is outside the adsorbate's {n} atoms.")
        return mol.positions[int(anchor)].copy(), np.array([int(anchor)])
    if isinstance(anchor, str):
        idx = np.array([i for i, s in enumerate(mol.get_chemical_symbols()) if s == anchor])
        if len(idx) == 0:
            raise StructureError(
                f"anchor {anchor!r} is not an element of the adsorbate "
                f"({mol.get_chemical_formula(mode='hill')})."
            )
        return mol.positions[idx].mean(axis=0), idx
    raise StructureError(f"anchor must be an atom index or an element symbol, got {anchor!r}.")


def _rotation_to_z(v: np.ndarray) -> np.ndarray:
    """Rotation matrix turning the unit vector v onto +z (Rodrigues)."""
    v = v / np.linalg.norm(v)
    z = np.array([0.0, 0.0, 1.0])
    c = float(v @ z)
    if c > 1 - 1e-12:
        return np.eye(3)
    if c < -1 + 1e-12:
        return np.diag([1.0, -1.0, -1.0])  # half turn about x
    k = np.cross(v, z)
    s = np.linalg.norm(k)
    k /= s
    K = np.array([[0, -k[2], k[1]], [k[2], 0, -k[0]], [-k[1], k[0], 0]])
    return np.eye(3) + s * K + (1 - c) * K @ K


def oriented(mol, anchor=None, tilt: float = 0.0, azimuth: float = 0.0) -> tuple[np.ndarray, np.ndarray]:
    """Positions of ``mol`` relative to its anchor after orientation, and the anchor atoms.

    Parameters
    ----------
    mol : ase.Atoms
    anchor : int, str or None
        Atom index, element symbol (centroid of those atoms) or None: for a molecule named
        to :func:`make_adsorbate` the first atom of the first element other than H in its name
        (C in CO, N in NO and NH3, O in H2O and OH), for a user structure its first atom.
    tilt, azimuth : float
        Degrees; see the module docstring.
    """
    p0, idx = _anchor(mol, anchor)
    rel = mol.positions - p0
    rest = np.setdiff1d(np.arange(len(mol)), idx)
    R = np.eye(3)
    if len(rest):
        axis = rel[rest].mean(axis=0)
        if np.linalg.norm(axis) > 1e-6:
            R = _rotation_to_z(axis)
    t, a = math.radians(float(tilt)), math.radians(float(azimuth))
    Ry = np.array([[math.cos(t), 0, math.sin(t)], [0, 1, 0], [-math.sin(t), 0, math.cos(t)]])
    Rz = np.array([[math.cos(a), -math.sin(a), 0], [math.sin(a), math.cos(a), 0], [0, 0, 1]])
    return rel @ (Rz @ Ry @ R).T, idx


# ---------------------------------------------------------------------------- contacts
def close_contacts(atoms, factor: float = CONTACT_FACTOR, minimum: float | None = None,
                   among=None) -> list[tuple[int, int, float]]:
    """Pairs of atoms closer than a sane minimum distance (periodic in the surface plane).

    Parameters
    ----------
    atoms : ase.Atoms
    factor : float
        Two atoms i, j overlap when closer than ``factor * (r_i + r_j)`` with the covalent
        radii of ``ase.data.covalent_radii`` (B. Cordero et al., Dalton Trans. 2832 (2008)).
    minimum : float, optional
        A fixed minimum distance in Angstrom instead of the radii rule.
    among : array_like of int, optional
        Only pairs with at least one atom in this set.

    Returns
    -------
    list of (i, j, distance)
        Sorted by distance; ``i`` may equal ``j`` when an atom is too close to its own
        periodic image.
    """
    from ase.data import covalent_radii

    if len(atoms) == 0:
        return []
    A = slab_cell2d(atoms)
    pos = np.asarray(atoms.positions, dtype=float)
    radii = covalent_radii[atoms.numbers]
    reach = 2 * factor * float(radii.max()) if minimum is None else float(minimum)
    per = PeriodicImages(pos, atoms.numbers, A, reach + 1e-6)
    from scipy.spatial import cKDTree

    subset = np.arange(len(atoms)) if among is None else np.unique(np.asarray(among, dtype=int))
    if len(subset) == 0:
        return []
    t = cKDTree(per.home[subset])
    sdm = t.sparse_distance_matrix(per.tree, reach, output_type="ndarray")
    i = subset[sdm["i"]]
    j = per.index[sdm["j"]]
    dist = sdm["v"]
    self_img = (sdm["j"] < len(atoms)) & (i == j)
    i, j, dist = i[~self_img], j[~self_img], dist[~self_img]
    limit = np.full(len(dist), float(minimum)) if minimum is not None else factor * (radii[i] + radii[j])
    bad = dist < limit - 1e-9
    out = {}
    for a, b, v in zip(i[bad], j[bad], dist[bad], strict=True):
        key = (min(int(a), int(b)), max(int(a), int(b)))
        if key not in out or v < out[key]:
            out[key] = float(v)
    return sorted(((a, b, v) for (a, b), v in out.items()), key=lambda x: (x[2], x[0], x[1]))


def check_contacts(atoms, factor: float = CONTACT_FACTOR, minimum: float | None = None,
                   among=None, what: str = "the structure") -> None:
    """Raise :class:`StructureError` naming the closest pair if two atoms overlap."""
    bad = close_contacts(atoms, factor=factor, minimum=minimum, among=among)
    if not bad:
        return
    i, j, d = bad[0]
    s = atoms.get_chemical_symbols()
    from ase.data import covalent_radii

    need = minimum if minimum is not None else factor * (covalent_radii[atoms.numbers[i]]
                                                          + covalent_radii[atoms.numbers[j]])
    raise StructureError(
        f"{what} puts atoms {i} ({s[i]}) and {j} ({s[j]}) {d:.2f} A apart, closer than the minimum "
        f"{need:.2f} A ({len(bad)} such pair(s)); raise the height or bond length, or choose "
        "other sites."
    )


# ---------------------------------------------------------------------------- placement
def _surface_height(atoms, sub_mask, xy: np.ndarray, sites) -> np.ndarray:
    """Mean height of the surface atoms nearest (laterally) to each point."""
    A = slab_cell2d(atoms)
    surf = sites.surface_atoms
    per = PeriodicImages(atoms.positions[surf], atoms.numbers[surf], A, 4 * sites.nn_distance)
    from scipy.spatial import cKDTree

    tree = cKDTree(per.xyz[:, :2])
    out = np.empty(len(xy))
    for k, p in enumerate(xy):
        dd, jj = tree.query(p, k=min(8, len(per.xyz)))
        dd, jj = np.atleast_1d(dd), np.atleast_1d(jj)
        near = dd <= dd.min() + 0.1 * sites.nn_distance
        out[k] = per.xyz[jj[near], 2].mean()
    return out


def _bond_height(atoms, sub_mask, xy: np.ndarray, b: float, what: str) -> np.ndarray:
    """z of a point at distance >= b from every substrate atom, touching the nearest ones."""
    A = slab_cell2d(atoms)
    sub = np.nonzero(sub_mask)[0]
    per = PeriodicImages(atoms.positions[sub], atoms.numbers[sub], A, b + 1e-6)
    from scipy.spatial import cKDTree

    tree = cKDTree(per.xyz[:, :2])
    out = np.empty(len(xy))
    for k, p in enumerate(xy):
        idx = tree.query_ball_point(p, b - 1e-9)
        if not idx:
            dmin, _ = tree.query(p)
            raise StructureError(
                f"{what}: bond_length {b:.3f} A is shorter than the lateral distance {dmin:.3f} A to the "
                "nearest substrate atom; give a longer bond_length or a height."
            )
        q = per.xyz[idx]
        rho2 = np.sum((q[:, :2] - p) ** 2, axis=1)
        out[k] = float(np.max(q[:, 2] + np.sqrt(b * b - rho2)))
    return out


def add_adsorbate(
    atoms,
    species,
    site: str | None = None,
    position=None,
    *,
    which="first",
    height: float | None = None,
    bond_length: float | None = None,
    tilt: float = 0.0,
    azimuth: float = 0.0,
    anchor=None,
    contact_factor: float = CONTACT_FACTOR,
    sites=None,
):
    """Place an atom or molecule on a named site or at fractional positions of the cell.

    Parameters
    ----------
    atoms : ase.Atoms
        The slab (not changed; a new slab is returned).
    species : str or ase.Atoms
        See :func:`make_adsorbate`.
    site : str, optional
        A site name from :func:`surfgeo.slab.sites.find_sites` (``"top"``,
        ``"fcc-hollow"``, ``"step-edge-bridge"`` ...). Give ``site`` or ``position``.
    position : array_like, shape (2,) or (k, 2), optional
        Fractional position(s) in the slab's in-plane cell.
    which : "first", "all", int or list of int
        For a named site: which sites of the class (ordered by fractional position) get an
        adsorbate; ``"all"`` fills every site of the class in the cell.
    height : float, optional
        Height (Angstrom) of the anchor above the mean height of the surface atoms around
        the site.
    bond_length : float, optional
        Distance (Angstrom) of the anchor from the nearest substrate atom(s). Give exactly
        one of ``height`` and ``bond_length``.
    tilt, azimuth : float
        Orientation in degrees (module docstring).
    anchor : int, str or None
        The point of the adsorbate put on the site (module docstring).
    contact_factor : float
        Refuse to place atoms closer than this fraction of the covalent radii sum to any
        other atom (see :func:`close_contacts`).
    sites : SurfaceSites, optional
        Sites already found for this slab (saves finding them again).

    Returns
    -------
    ase.Atoms
        The slab with the adsorbate(s) appended.

    Raises
    ------
    StructureError
        Unknown species or site, no height, impossible bond length, overlapping atoms.

    Examples
    --------
    >>> from ase.build import fcc111
    >>> from surfgeo.slab.supercell import make_supercell
    >>> slab = make_supercell(fcc111("Pt", (1, 1, 3), vacuum=6.0), "p(2x2)")
    >>> s = add_adsorbate(slab, "O", "fcc-hollow", bond_length=2.05)
    >>> s[-1].symbol, coverage(s)
    ('O', {'O': Fraction(1, 4)})
    """
    mol, label = make_adsorbate(species)
    if (height is None) == (bond_length is None):
        raise StructureError("give exactly one of height and bond_length for the adsorbate.")
    for nm, v in (("height", height), ("bond_length", bond_length), ("tilt", tilt), ("azimuth", azimuth)):
        if v is not None and not math.isfinite(float(v)):
            raise StructureError(f"adsorbate {nm} must be a finite number, got {v!r}.")
    if bond_length is not None and float(bond_length) <= 0:
        raise StructureError(f"bond_length must be positive (Angstrom), got {bond_length!r}.")
    A = slab_cell2d(atoms)
    n = len(atoms)
    sub_mask = np.ones(n, dtype=bool)
    for key in (ADSORBATE_KEY, SUBLATTICE_KEY):
        if key in atoms.arrays:
            sub_mask &= np.asarray(atoms.arrays[key]) == 0
    if (site is None) == (position is None):
        raise StructureError("give either a site name or a fractional position for the adsorbate.")
    if sites is None:
        sites = find_sites(atoms)
    if site is not None:
        cls = sites.get(site)
        m = cls.multiplicity
        if isinstance(which, str):
            if which == "first":
                sel = [0]
            elif which == "all":
                sel = list(range(m))
            else:
                raise StructureError(
                    f"which must be 'first', 'all', an index or a list of indices, got {which!r}."
                )
        else:
            sel = [which] if isinstance(which, (int, np.integer)) else list(which)
            for k in sel:
                if not isinstance(k, (int, np.integer)) or isinstance(k, bool) or not 0 <= k < m:
                    raise StructureError(
                        f"site index {k!r} is out of range: '{site}' has {m} site(s) in this cell "
                        f"(0..{m - 1})."
                    )
        frac = cls.fractional[sel]
        xy = cls.positions[sel, :2]
        zref = cls.positions[sel, 2]
        what = f"the {label} adsorbate on '{site}'"
    else:
        try:
            frac = np.array(position, dtype=float).reshape(-1, 2)
        except (TypeError, ValueError):
            raise StructureError(
                "adsorbate position must be one or more pairs of fractional coordinates."
            ) from None
        if not np.all(np.isfinite(frac)):
            raise StructureError("adsorbate position must be finite numbers.")
        xy = frac @ A
        zref = _surface_height(atoms, sub_mask, xy, sites)
        what = f"the {label} adsorbate at fractional position(s) {frac.round(4).tolist()}"
    if height is not None:
        z = zref + float(height)
    else:
        z = _bond_height(atoms, sub_mask, xy, float(bond_length), what)
        low = zref - z
        if np.any(low > 1e-6):
            raise StructureError(
                f"{what}: bond_length {float(bond_length):.3f} A would put the adsorbate "
                f"{float(low.max()):.2f} A below the surface atoms around the site (it fits between "
                "them); give a longer bond_length, or a height for a subsurface position."
            )
    rel, _ = oriented(mol, anchor, tilt, azimuth)

    new = copy_slab(atoms)
    ids = np.asarray(atoms.arrays.get(ADSORBATE_KEY, np.zeros(n, int)), dtype=int)
    next_id = int(ids.max()) + 1 if len(ids) else 1
    from ase import Atoms

    block_pos = np.concatenate([rel + np.array([p[0], p[1], zz]) for p, zz in zip(xy, z, strict=True)])
    block = Atoms(
        symbols=list(mol.get_chemical_symbols()) * len(xy),
        positions=block_pos,
    )
    new.arrays.setdefault(ADSORBATE_KEY, ids.copy())
    new.extend(block)
    new.arrays[ADSORBATE_KEY][n:] = np.repeat(np.arange(next_id, next_id + len(xy)), len(mol))
    if ORIGIN_KEY in new.arrays:
        new.arrays[ORIGIN_KEY][n:] = -1
    if SHIFT_KEY in new.arrays:
        new.arrays[SHIFT_KEY][n:] = 0
    check_contacts(new, factor=contact_factor, among=np.arange(n, len(new)), what=what)

    info = surface_info(atoms)
    det = abs(round(float(np.linalg.det(info.supercell_matrix))))
    entry = {
        "species": label,
        "site": site,
        "fractional": (frac - np.floor(frac + 1e-12)).round(10).tolist(),
        "anchor_height": [float(v) for v in z],
        "height": None if height is None else float(height),
        "bond_length": None if bond_length is None else float(bond_length),
        "tilt_deg": float(tilt),
        "azimuth_deg": float(azimuth),
        "count": len(xy),
        "coverage": str(Fraction(len(xy), det)),
    }
    extra = info.extra.get("adsorbates", [])
    where = f"'{site}'" if site else f"position(s) {entry['fractional']}"
    update_surface_info(
        new, provenance=f"adsorbate {label} x{len(xy)} on {where}",
        adsorbates=list(extra) + [entry],
    )
    return new


def coverage(atoms) -> dict[str, Fraction]:
    """Adsorbate molecules per 1x1 substrate cell (monolayers), by chemical formula.

    The number of molecules of each kind in the cell divided by the number of 1x1 cells
    (the determinant of the supercell matrix), exactly.
    """
    ids = atoms.arrays.get(ADSORBATE_KEY)
    if ids is None:
        return {}
    ids = np.asarray(ids, dtype=int)
    det = abs(round(float(np.linalg.det(surface_info(atoms).supercell_matrix))))
    labels = Counter()
    for k in np.unique(ids[ids > 0]):
        labels[atoms[np.nonzero(ids == k)[0]].get_chemical_formula(mode="hill")] += 1
    return {lab: Fraction(c, det) for lab, c in sorted(labels.items())}


__all__ = [
    "CONTACT_FACTOR",
    "add_adsorbate",
    "check_contacts",
    "close_contacts",
    "coverage",
    "make_adsorbate",
    "oriented",
]
