"""Cutting a face of a bulk crystal: the primitive reduced surface cell, layers, terminations, slabs.

The geometry of a face (:func:`face_geometry`)
----------------------------------------------
1. Miller indices (h k l) refer to the conventional cell (four-index (h k i l) is accepted
   for hexagonal cells, with i = -(h + k)). The outward normal is n = G / |G| with
   G = h b1 + k b2 + l b3 (b_i the reciprocal vectors of the conventional cell).
2. The translation lattice of the crystal (primitive, found from spglib's pure
   translations, :func:`surfgeo.slab.bulk.translation_lattice`) gives integer Miller
   indices m of the same plane family in the primitive basis; the lattice vectors u with
   m . u = 0 form the surface lattice, and a vector with m . u = 1 steps one lattice plane
   up. Both come from a unimodular integer completion of m (extended Euclid), so the
   surface cell is primitive.
3. The 2D basis is Gauss-Lagrange reduced: a1 a shortest lattice vector (the one with the
   lexicographically largest bulk Cartesian direction among the shortest, for a
   reproducible choice), a2 the shortest vector that completes a right-handed basis,
   preferring an obtuse angle (120 degrees for hexagonal lattices).
4. The slab frame has x along a1, z along n (out of the crystal), y = z x x. The stacking
   vector (one lattice plane up) gets the smallest possible in-plane component by
   subtracting the nearest surface lattice vector.
5. The atoms of one primitive cell, expressed in (a1, a2, stacking) coordinates, are the
   repeat unit along the normal (one lattice plane spacing d). They are grouped into atomic
   layers by height (gaps larger than ``layer_tol``, with the period cut in its largest
   gap), which gives the bulk layer spacings and the possible terminations.

A slab (:func:`surface_slab`) stacks ``layers`` atomic layers downwards from the chosen
top layer, repeats them in-plane (``size``, ``rectangular``), and sets the cell
(a1, a2 in the xy-plane, c as described in :func:`surface_slab`).

References
----------
.. [1] J. F. Nicholas, *An Atlas of Models of Crystal Surfaces* (Gordon and Breach, 1965):
   surface cells and layer spacings of cubic and hexagonal faces.
.. [2] P. W. Tasker, "The stability of ionic crystal surfaces", J. Phys. C 12, 4977 (1979):
   classification of terminations as non-polar (types 1, 2) or polar (type 3).
"""

from __future__ import annotations

import itertools
import math
from collections import Counter
from dataclasses import dataclass, field
from fractions import Fraction

import numpy as np
from ase import Atoms

from surfgeo.checks import positive_number
from surfgeo.errors import StructureError
from surfgeo.lattice import Lattice2D, gauss_reduce
from surfgeo.lattice.rational import closest_denominators
from surfgeo.slab.bulk import (
    CONTACT_FACTOR,
    bulk_crystal,
    bulk_description,
    check_distances,
    is_hexagonal_cell,
    translation_lattice,
)
from surfgeo.slab.info import SurfaceInfo, set_surface_info
from surfgeo.slab.layers import LAYER_TOL, group_layers

#: Largest number of atomic layers a slab may have.
MAX_LAYERS = 100_000


# ---------------------------------------------------------------------------------- Miller indices
def parse_miller(miller, hexagonal: bool = False) -> tuple[tuple[int, int, int], tuple[int, ...]]:
    """Validate Miller indices and return (three-index hkl, the indices as given, reduced).

    Parameters
    ----------
    miller : sequence of 3 or 4 ints
        (h k l), or (h k i l) for a hexagonal cell (i = -(h + k)).
    hexagonal : bool
        Whether the crystal's conventional cell is hexagonal (four indices allowed).

    Returns
    -------
    hkl : tuple of 3 ints
        Three-index form, divided by the common divisor.
    given : tuple of ints
        The given indices divided by their common divisor (3 or 4 entries).
    """
    try:
        vals = [float(v) for v in miller]
    except (TypeError, ValueError):
        raise StructureError(f"Miller indices must be integers, got {miller!r}.") from None
    if len(vals) not in (3, 4):
        raise StructureError(f"Miller indices need 3 numbers (h k l) or 4 (h k i l), got {len(vals)}.")
    if any(not math.isfinite(v) or abs(v - round(v)) > 1e-9 for v in vals):
        raise StructureError(f"Miller indices must be integers, got {tuple(miller)!r}.")
    ints = [int(round(v)) for v in vals]
    if all(v == 0 for v in ints):
        raise StructureError(
            "Miller indices (0 0 0) do not define a plane; give at least one non-zero index."
        )
    if len(ints) == 4:
        h, k, i, l = ints
        if i != -(h + k):
            raise StructureError(
                f"Miller-Bravais indices ({h} {k} {i} {l}) need i = -(h + k) = {-(h + k)}, got i = {i}."
            )
        if not hexagonal:
            raise StructureError(
                "four-index Miller-Bravais indices need a hexagonal crystal; give three indices (h k l)."
            )
        hkl = [h, k, l]
    else:
        hkl = ints
    g = math.gcd(*hkl)
    hkl_t = tuple(v // g for v in hkl)
    given = tuple(v // g for v in ints)
    return hkl_t, given  # type: ignore[return-value]


def _unimodular_completion(m: list[int]) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Integer vectors k1, k2 with m.k = 0 and u with m.u = 1 forming a unimodular basis."""
    v = [int(x) for x in m]
    cols = [[1, 0, 0], [0, 1, 0], [0, 0, 1]]  # columns of V (plain integers: a few dozen steps)
    while sum(1 for x in v if x != 0) > 1:
        nz = [i for i in range(3) if v[i] != 0]
        p = min(nz, key=lambda i: abs(v[i]))
        for j in nz:
            if j == p:
                continue
            q = v[j] // v[p]
            v[j] -= q * v[p]
            cols[j] = [a - q * b for a, b in zip(cols[j], cols[p], strict=True)]
    p = next(i for i in range(3) if v[i] != 0)
    if v[p] < 0:
        cols[p] = [-a for a in cols[p]]
        v[p] = -v[p]
    if v[p] != 1:  # pragma: no cover - m is coprime by construction
        raise StructureError("internal error: Miller indices in the primitive basis are not coprime.")
    others = [i for i in range(3) if i != p]
    return (np.array(cols[others[0]], dtype=np.int64), np.array(cols[others[1]], dtype=np.int64),
            np.array(cols[p], dtype=np.int64))


def _rational(x: float, limit: int = 48) -> Fraction:
    return Fraction(float(x)).limit_denominator(limit)


# ---------------------------------------------------------------------------------- face geometry
@dataclass(frozen=True)
class Face:
    """Geometry of one face of a bulk crystal (all lengths Angstrom).

    Attributes
    ----------
    miller : tuple of int
        The indices as given (3 or 4), divided by their common divisor.
    hkl : tuple of 3 ints
        Three-index Miller indices in the conventional cell.
    normal : ndarray (3,)
        Unit outward normal in the bulk Cartesian frame.
    rotation : ndarray (3, 3)
        Orthogonal matrix taking bulk Cartesian vectors to the slab frame (v_slab = R @ v).
    cell2d : ndarray (2, 2)
        Rows a1, a2 of the primitive reduced surface cell in the slab frame.
    stacking : ndarray (3,)
        Lattice vector one lattice plane up (slab frame), smallest in-plane part.
    plane_spacing : float
        Spacing d of the lattice planes (one stacking period).
    basis_frac : ndarray (nb, 3)
        Atoms of one primitive cell in (a1, a2, stacking) coordinates, third in [0, 1).
    basis_symbols : list of str
    basis_group : ndarray of int (nb,)
        Atomic layer (0 = lowest in the period) of each basis atom.
    layer_heights : ndarray (L,)
        Mean height of each atomic layer of the period above the period's origin.
    bulk : dict
        Description of the bulk crystal.
    primitive_volume : float
    """

    miller: tuple[int, ...]
    hkl: tuple[int, int, int]
    normal: np.ndarray
    rotation: np.ndarray
    cell2d: np.ndarray
    stacking: np.ndarray
    plane_spacing: float
    basis_frac: np.ndarray
    basis_symbols: list[str]
    basis_group: np.ndarray
    layer_heights: np.ndarray
    bulk: dict
    primitive_volume: float
    primitive_miller: tuple[int, int, int] = field(default=(0, 0, 0))

    @property
    def layers_per_period(self) -> int:
        return len(self.layer_heights)

    @property
    def layer_spacing(self) -> float:
        """Mean spacing of atomic layers along the normal (Angstrom)."""
        return self.plane_spacing / self.layers_per_period

    @property
    def layer_spacings(self) -> np.ndarray:
        """Bulk spacing from each atomic layer of the period to the next one above it."""
        h = self.layer_heights
        return np.diff(np.append(h, h[0] + self.plane_spacing))

    @property
    def area(self) -> float:
        """Area of the primitive surface cell (Angstrom^2)."""
        return abs(float(np.linalg.det(self.cell2d)))

    @property
    def lattice(self) -> Lattice2D:
        return Lattice2D(self.cell2d, self.label)

    @property
    def label(self) -> str:
        return f"{self.bulk.get('formula', '')}({miller_string(self.miller)})"

    def layer_composition(self, group: int) -> dict[str, int]:
        """Atoms of each element in atomic layer ``group`` per 1x1 cell."""
        syms = [s for s, g in zip(self.basis_symbols, self.basis_group, strict=True) if g == group]
        return dict(sorted(Counter(syms).items()))

    def stacking_matrix(self) -> np.ndarray:
        """Rows (a1, a2, stacking) as 3-vectors in the slab frame."""
        B = np.zeros((3, 3))
        B[:2, :2] = self.cell2d
        B[2] = self.stacking
        return B


def miller_string(miller) -> str:
    """``(1 1 1)`` -> ``"111"``, ``(10 8 7)`` -> ``"10 8 7"``, ``(1 0 -1 0)`` -> ``"10-10"``."""
    vals = [int(v) for v in miller]
    if all(abs(v) < 10 for v in vals):
        return "".join(str(v) for v in vals)
    return " ".join(str(v) for v in vals)


def _as_bulk(bulk) -> Atoms:
    if isinstance(bulk, Atoms):
        if abs(np.linalg.det(np.asarray(bulk.cell[:]))) < 1e-9 or not all(bulk.pbc):
            raise StructureError("the bulk crystal needs a periodic 3D cell.")
        return bulk
    if isinstance(bulk, str):
        return bulk_crystal(bulk)
    raise StructureError("the bulk crystal must be an ase.Atoms or an element symbol such as 'Pt'.")


#: Lattice coefficients (i, j), |i|, |j| <= 2, of the candidate vectors of a reduced 2D basis.
_COMBOS2 = np.array([(i, j) for i in range(-2, 3) for j in range(-2, 3) if (i, j) != (0, 0)], dtype=float)


def _choose_basis(k1: np.ndarray, k2: np.ndarray, n: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Reduced, right-handed (about n) basis of the plane lattice spanned by k1, k2 (3D vectors).

    a1 is a shortest lattice vector, a2 the shortest vector completing a right-handed basis
    (the obtuse one where an obtuse and an acute one are equally short); among the shortest
    a1 the one whose partner is shortest, then obtuse, then the largest bulk direction
    (x, then y, then z) wins. The candidates are the lattice vectors with coefficients up to 2
    in a Gauss-reduced basis (plain floats: a few dozen 2D vectors).
    """
    e1 = k1 / np.linalg.norm(k1)
    e2 = np.array([n[1] * e1[2] - n[2] * e1[1], n[2] * e1[0] - n[0] * e1[2], n[0] * e1[1] - n[1] * e1[0]])
    E = np.array([e1, e2])  # 2D coordinates: v2 = E @ v
    red = gauss_reduce([E @ k1, E @ k2])[0]
    cands = _COMBOS2 @ red
    c2 = cands.tolist()
    lens = np.linalg.norm(cands, axis=1).tolist()
    lmin = min(lens)
    area = abs(float(red[0, 0] * red[1, 1] - red[0, 1] * red[1, 0]))
    scale = 1.0 + 4.0 * lmin * lmin
    rank_len = [round(v, 6) * 1e6 for v in lens]
    (e1x, e1y, e1z), (e2x, e2y, e2z) = E.tolist()
    best_key, best = None, None
    for s, (sx, sy) in enumerate(c2):
        if lens[s] > lmin * (1 + 1e-6):
            continue
        # partner: right-handed, shortest, then most obtuse
        jbest, rbest, dbest = 0, math.inf, sx * c2[0][0] + sy * c2[0][1]
        for j, (x, y) in enumerate(c2):
            if abs(sx * y - sy * x - area) > 1e-6 * area:
                continue
            d = sx * x + sy * y
            r = rank_len[j] + round(d, 6) / scale
            if r < rbest:
                jbest, rbest, dbest = j, r, d
        acute = dbest > 1e-9 * lmin * lmin
        ln = lens[s]
        u = (round((sx * e1x + sy * e2x) / ln, 6), round((sx * e1y + sy * e2y) / ln, 6),
             round((sx * e1z + sy * e2z) / ln, 6))
        key = (round(lens[jbest], 6), acute, -u[0], -u[1], -u[2], s)
        if best_key is None or key < best_key:
            best_key, best = key, (s, jbest)
    s, j = best
    cands3 = cands @ E  # one product for all (the same rounding as every other caller's)
    return cands3[s], cands3[j]


_OFFSETS = np.array(list(itertools.product((-1, 0, 1, 2), repeat=2)), dtype=float)


def _reduce_inplane(vec2: np.ndarray, A: np.ndarray) -> np.ndarray:
    """The shortest vector vec2 + L over lattice vectors L of A (rows, 2D)."""
    f = vec2 @ np.linalg.inv(A)
    cands = vec2 - (np.floor(f) + _OFFSETS) @ A
    ln = np.einsum("ij,ij->i", cands, cands)
    return cands[int(np.argmin(ln + 1e-12 * np.arange(len(ln))))]


_PI_CACHE: dict[bytes, np.ndarray] = {}


def _primitive_miller(bulk: Atoms, hkl) -> tuple[np.ndarray, list[int]]:
    """Primitive basis P (rows) and coprime integer Miller indices of hkl in that basis."""
    C = np.asarray(bulk.cell[:], dtype=float)
    P = translation_lattice(bulk)
    P_frac = P @ np.linalg.inv(C)
    # P_frac has small denominators: scale to integers once, then integer arithmetic
    key = P_frac.tobytes()
    if key not in _PI_CACHE:
        D = math.lcm(*(int(q) for q in np.unique(closest_denominators(P_frac, 48))))
        Pi = np.rint(P_frac * D).astype(np.int64)
        if np.any(np.abs(Pi - P_frac * D) > 1e-6):  # pragma: no cover - spglib translations are rational
            raise StructureError("internal error: the primitive cell is not a rational multiple of the cell.")
        if len(_PI_CACHE) > 64:
            _PI_CACHE.clear()
        _PI_CACHE[key] = Pi
    Pi = _PI_CACHE[key]
    mi = [int(v) for v in Pi @ np.array(hkl, dtype=np.int64)]
    g = math.gcd(*mi)
    return P, [v // g for v in mi]


def plane_lattice(bulk, hkl) -> np.ndarray:
    """A Gauss-Lagrange reduced basis (2 rows, bulk Cartesian frame, Angstrom) of the lattice
    vectors in the (hkl) planes of ``bulk`` (conventional three-index Miller indices).

    The first row is a shortest vector of the plane lattice; every shortest vector is one of
    +-a1, +-a2, +-(a1 + a2), +-(a1 - a2). (The orientation conventions of a slab cell, which
    :func:`face_geometry` applies, are not needed here.)
    """
    bulk = _as_bulk(bulk)
    C = np.asarray(bulk.cell[:], dtype=float)
    P, mi = _primitive_miller(bulk, hkl)
    key = (C.tobytes(), P.tobytes(), tuple(int(v) for v in hkl))
    if key not in _PLANE_CACHE:
        G = np.array(hkl, dtype=float) @ np.linalg.inv(C).T
        n = G / np.linalg.norm(G)
        k1, k2, _ = _unimodular_completion(mi)
        K1, K2 = k1 @ P, k2 @ P
        e1 = K1 / np.linalg.norm(K1)
        e2 = np.array([n[1] * e1[2] - n[2] * e1[1], n[2] * e1[0] - n[0] * e1[2], n[0] * e1[1] - n[1] * e1[0]])
        E = np.array([e1, e2])  # 2D coordinates in the plane: v2 = E @ v
        red, _ = gauss_reduce([E @ K1, E @ K2])
        if len(_PLANE_CACHE) > 256:
            _PLANE_CACHE.clear()
        _PLANE_CACHE[key] = red @ E
    return _PLANE_CACHE[key].copy()


_PLANE_CACHE: dict[tuple, np.ndarray] = {}


def clear_caches() -> None:
    """Forget cached translation lattices, plane lattices, step decompositions and microfacet lists.

    These pure results are kept between calls so that building several slabs of the same
    face (other thicknesses, sizes, terminations) does not redo them; only benchmarks of a
    first build need to clear them.
    """
    from surfgeo.slab import bulk as _bulk
    from surfgeo.slab import steps as _steps

    _bulk._TL_CACHE.clear()
    _PI_CACHE.clear()
    _PLANE_CACHE.clear()
    _steps._decompose.cache_clear()
    _steps._members_cached.cache_clear()
    _steps._all_members_cached.cache_clear()
    _steps._ideal_metric_dot.cache_clear()


def face_geometry(bulk, miller, layer_tol: float = LAYER_TOL) -> Face:
    """Geometry of the face ``miller`` of ``bulk``: surface cell, stacking, atomic layers.

    Parameters
    ----------
    bulk : ase.Atoms or str
        A bulk crystal in its conventional cell (see :func:`surfgeo.slab.bulk.bulk_crystal`),
        or an element symbol.
    miller : sequence of int
        (h k l) in the conventional cell, or (h k i l) for hexagonal crystals.
    layer_tol : float
        Atoms of one stacking period closer in height than this (Angstrom) form one atomic
        layer.

    Returns
    -------
    Face

    Examples
    --------
    >>> f = face_geometry("Cu", (1, 1, 1))
    >>> round(f.layer_spacing, 4), f.lattice.kind()
    (2.0842, 'hexagonal')
    """
    bulk = _as_bulk(bulk)
    desc = bulk_description(bulk)
    hex_cell = is_hexagonal_cell(bulk)
    hkl, given = parse_miller(miller, hexagonal=hex_cell)
    C = np.asarray(bulk.cell[:], dtype=float)
    Cinv = np.linalg.inv(C)
    G = np.array(hkl, dtype=float) @ Cinv.T
    n = G / np.linalg.norm(G)

    P, mi = _primitive_miller(bulk, hkl)
    k1, k2, u3 = _unimodular_completion(mi)
    K1, K2, U = k1 @ P, k2 @ P, u3 @ P
    d = float(U @ n)
    if d <= 0:  # pragma: no cover - u3 steps up by construction
        raise StructureError("internal error: the stacking vector does not point out of the surface.")

    a1, a2 = _choose_basis(K1, K2, n)
    x = a1 / np.linalg.norm(a1)
    y = np.array([n[1] * x[2] - n[2] * x[1], n[2] * x[0] - n[0] * x[2], n[0] * x[1] - n[1] * x[0]])
    R = np.array([x, y, n])
    A = np.array([[float(np.linalg.norm(a1)), 0.0], [float(a2 @ x), float(a2 @ y)]])
    u = R @ U
    spar = _reduce_inplane(u[:2], A)
    S = np.array([spar[0], spar[1], d])

    Bm = np.zeros((3, 3))
    Bm[:2, :2] = A
    Bm[2] = S
    pos = (R @ bulk.positions.T).T
    F = pos @ np.linalg.inv(Bm)
    F -= np.floor(F)
    # one atom per (element, fractional position to 1e-4): the rows (Z, k1, k2, k3) as one integer
    steps = 10_000
    key = np.rint(F * steps).astype(np.int64) % steps
    z = np.asarray(bulk.numbers, dtype=np.int64)
    code = ((z * steps + key[:, 0]) * steps + key[:, 1]) * steps + key[:, 2]
    _, first = np.unique(code, return_index=True)
    first = np.sort(first)
    F = F[first]
    all_symbols = bulk.get_chemical_symbols()
    symbols = [all_symbols[i] for i in first]
    vol_prim = abs(float(np.linalg.det(P)))
    expected = len(bulk) * vol_prim / abs(float(np.linalg.det(C)))
    if len(F) != round(expected):
        raise StructureError(
            f"the bulk cell does not reduce to a primitive cell consistently ({len(F)} atoms found, "
            f"{expected:.2f} expected); check the structure for overlapping or partial atoms."
        )

    # atomic layers of one period: cut the period in its largest height gap
    h = F[:, 2] * d
    hs = np.sort(h)
    gaps = np.diff(np.append(hs, hs[0] + d))
    j = int(np.argmax(gaps))
    origin = (hs[j] + gaps[j] / 2.0) % d
    F[:, 2] = ((F[:, 2] - origin / d) % 1.0)
    F[:, 2] = np.where(F[:, 2] > 1 - 1e-12, 0.0, F[:, 2])
    h = F[:, 2] * d
    groups = group_layers(h, layer_tol)
    group = np.empty(len(F), dtype=int)
    for gi, idx in enumerate(groups):
        group[idx] = gi
    heights = np.array([h[idx].mean() for idx in groups])

    return Face(
        miller=given,
        hkl=hkl,
        normal=n,
        rotation=R,
        cell2d=A,
        stacking=S,
        plane_spacing=d,
        basis_frac=F,
        basis_symbols=symbols,
        basis_group=group,
        layer_heights=heights,
        bulk=desc,
        primitive_volume=vol_prim,
        primitive_miller=tuple(mi),  # type: ignore[arg-type]
    )


# ---------------------------------------------------------------------------------- terminations
def default_charges(face: Face) -> dict[str, float] | None:
    """Formal charges used for the polarity of terminations, or None if they cannot be guessed.

    Elements get no charges. A binary compound A_p B_q gets +q/g and -p/g (g = gcd), which
    fixes the ratio (the sign does not matter for polarity). Perovskites ABX3 get the
    common II-IV-VI values +2, +4, -2; give ``charges`` for anything else.
    """
    species = list(dict.fromkeys(face.basis_symbols))
    counts = Counter(face.basis_symbols)
    if len(species) == 1:
        return {species[0]: 0.0}
    order = face.bulk.get("species") or species
    order = [s for s in order if s in counts]
    if len(order) == 2:
        p, q = counts[order[0]], counts[order[1]]
        g = math.gcd(p, q)
        return {order[0]: q / g, order[1]: -p / g}
    if face.bulk.get("structure") == "perovskite" and len(order) == 3:
        return {order[0]: 2.0, order[1]: 4.0, order[2]: -2.0}
    return None


def _signature(face: Face, top: int, nlayers: int) -> list[tuple]:
    """Composition and spacing of ``nlayers`` atomic layers going down from group ``top``."""
    L = face.layers_per_period
    sp = face.layer_spacings
    sig = []
    for ell in range(nlayers):
        gi = (top - ell) % L
        below = (gi - 1) % L
        sig.append((tuple(sorted(face.layer_composition(gi).items())), float(sp[below])))
    return sig


def _same_signature(s1: list[tuple], s2: list[tuple], tol: float = 1e-3) -> bool:
    return len(s1) == len(s2) and all(
        a[0] == b[0] and abs(a[1] - b[1]) <= tol for a, b in zip(s1, s2, strict=True)
    )


def terminations(face_or_bulk, miller=None, charges: dict[str, float] | None = None,
                 layer_tol: float = LAYER_TOL) -> list[dict]:
    """Every distinct termination of a face, with its composition and polarity.

    Two terminations are the same when the sequence of layer compositions and spacings
    below the top layer is the same. Polarity follows Tasker: with formal charges Q_l per
    atomic layer (per 1x1 cell) at heights z_l, the repeat unit of one period that starts
    at the top layer has the dipole mu = sum Q_l z_l (e Angstrom per cell); a termination is
    polar when mu is not zero.

    Parameters
    ----------
    face_or_bulk : Face or ase.Atoms or str
    miller : sequence of int, optional
        Needed when a bulk crystal is given.
    charges : dict, optional
        Formal charge of each element; defaults from :func:`default_charges`.

    Returns
    -------
    list of dict
        Each with ``index``, ``top_layer`` (composition per 1x1 cell), ``period`` (list of
        layer compositions from the top down), ``spacings`` (Angstrom, from the top down),
        ``stoichiometric_layers`` (each layer has the bulk ratio), ``dipole`` (e Angstrom per
        1x1 cell or None), ``polar`` (bool or None when charges are unknown) and
        ``tasker_type`` (1, 2 or 3, or None).

    References
    ----------
    .. [1] P. W. Tasker, J. Phys. C 12, 4977 (1979).
    """
    face = face_or_bulk if isinstance(face_or_bulk, Face) else face_geometry(face_or_bulk, miller, layer_tol)
    L = face.layers_per_period
    q = charges if charges is not None else default_charges(face)
    if q is not None:
        missing = sorted(set(face.basis_symbols) - set(q))
        if missing:
            raise StructureError(
                f"charges are missing for {', '.join(missing)}; give a charge for every element."
            )
        net = sum(q[s] for s in face.basis_symbols)
        if abs(net) > 1e-6:
            raise StructureError(
                f"the formal charges {', '.join(f'{s}={q[s]:g}' for s in sorted(set(face.basis_symbols)))} "
                f"leave the bulk unit charged ({net:+g} per cell); give charges that add up to zero, "
                "e.g. Sr=2,Ti=4,O=-2."
            )
    bulk_counts = Counter(face.basis_symbols)
    gcount = math.gcd(*bulk_counts.values())
    bulk_ratio = {s: c / gcount for s, c in bulk_counts.items()}
    layer_charge = []
    stoich = []
    for gi in range(L):
        comp = face.layer_composition(gi)
        if q is not None:
            layer_charge.append(sum(q[s] * c for s, c in comp.items()))
        k = math.gcd(*comp.values())
        ratio = {s: c / k for s, c in comp.items()}
        stoich.append(ratio == bulk_ratio)
    charged = q is not None and any(abs(c) > 1e-9 for c in layer_charge)
    seen: list[list[tuple]] = []
    out: list[dict] = []
    for t in range(L - 1, -1, -1):  # from the highest layer of the period down
        sig = _signature(face, t, L)
        if any(_same_signature(sig, other) for other in seen):
            continue
        seen.append(sig)
        order = [(t - ell) % L for ell in range(L)]
        z = np.array([face.layer_heights[g] + (0 if g <= t else -face.plane_spacing) for g in order])
        rec: dict = {
            "index": len(out),
            "top_group": t,
            "top_layer": face.layer_composition(t),
            "period": [face.layer_composition(g) for g in order],
            "spacings": [float(face.layer_spacings[(g - 1) % L]) for g in order],
            "stoichiometric_layers": all(stoich),
        }
        if q is not None:
            qs = np.array([layer_charge[g] for g in order])
            mu = float(qs @ (z - z[0]))
            rec["layer_charges"] = [float(v) for v in qs]
            rec["dipole"] = mu
            rec["polar"] = bool(abs(mu) > 1e-6)
        else:
            rec["layer_charges"] = None
            rec["dipole"] = None
            rec["polar"] = None
        out.append(rec)
    if q is None:
        ttype = None
    elif not charged:
        ttype = 1
    elif any(not r["polar"] for r in out):
        ttype = 2
    else:
        ttype = 3
    for r in out:
        r["tasker_type"] = ttype
    return out


# ---------------------------------------------------------------------------------- slabs
def _rectangular_matrix(A: np.ndarray) -> np.ndarray:
    """Smallest integer M with M @ A rectangular (right-handed, shorter vector first).

    Among cells of the same size, b1 parallel to a1 is preferred (then the smallest turn of
    b1 away from a1, then non-negative entries), so that on a hexagonal lattice the 1x1 cell
    keeps a1 along +x: M = [[1, 0], [1, 2]].
    """
    r = range(-3, 4)
    vecs = [(np.array([i, j]), np.array([i, j]) @ A) for i in r for j in r if (i, j) != (0, 0)]
    area = abs(float(np.linalg.det(A)))
    best = None
    for (m1, v1), (m2, v2) in itertools.product(vecs, vecs):
        det = v1[0] * v2[1] - v1[1] * v2[0]
        if det <= 1e-9 * area:
            continue
        if abs(float(v1 @ v2)) > 1e-6 * float(np.linalg.norm(v1) * np.linalg.norm(v2)):
            continue
        n = round(det / area)
        turn = abs(math.atan2(A[0, 0] * v1[1] - A[0, 1] * v1[0], float(A[0] @ v1)))
        key = (n, round(float(np.linalg.norm(v1)), 6), round(float(np.linalg.norm(v2)), 6), round(turn, 6),
               int(np.sum(m1 < 0) + np.sum(m2 < 0)))
        if np.linalg.norm(v1) > np.linalg.norm(v2) * (1 + 1e-9):
            continue
        if best is None or key < best[0]:
            best = (key, np.array([m1, m2]))
    if best is None or best[0][0] > 2:
        kind = Lattice2D(A).kind()
        raise StructureError(
            f"this surface lattice is {kind}; it has no rectangular cell, so a rectangular cell "
            "is not possible."
        )
    return best[1].astype(int)


def _lattice_points(M: np.ndarray) -> np.ndarray:
    """The |det M| integer points (i, j) inside the cell M (rows) of the integer lattice."""
    if M[0, 1] == 0 and M[1, 0] == 0 and M[0, 0] > 0 and M[1, 1] > 0:  # n1 x n2 repetitions
        ii, jj = np.meshgrid(np.arange(M[0, 0]), np.arange(M[1, 1]), indexing="ij")
        return np.column_stack([ii.ravel(), jj.ravel()])
    corners = np.array([[0, 0], M[0], M[1], M[0] + M[1]])
    lo, hi = corners.min(axis=0), corners.max(axis=0)
    ii, jj = np.meshgrid(np.arange(lo[0], hi[0] + 1), np.arange(lo[1], hi[1] + 1), indexing="ij")
    pts = np.column_stack([ii.ravel(), jj.ravel()])
    f = pts @ np.linalg.inv(M.astype(float))
    eps = 1e-9
    keep = np.all((f > -eps) & (f < 1 - eps), axis=1)
    out = pts[keep]
    if len(out) != abs(round(np.linalg.det(M))):  # pragma: no cover
        raise StructureError("internal error: the supercell lattice points are inconsistent.")
    return out


def _check_int(name: str, value, lo: int, hi: int) -> int:
    try:
        v = float(value)
    except (TypeError, ValueError):
        raise StructureError(f"{name} must be a whole number, got {value!r}.") from None
    if not math.isfinite(v) or v != round(v) or not lo <= v <= hi:
        raise StructureError(f"{name} must be a whole number from {lo} to {hi}, got {value!r}.")
    return int(round(v))


def _palindromic(sig: list[tuple], tol: float = 1e-3) -> bool:
    comps = [s[0] for s in sig]
    spac = np.array([s[1] for s in sig[:-1]])
    return comps == comps[::-1] and bool(np.all(np.abs(spac - spac[::-1]) <= tol))


def surface_slab(
    bulk,
    miller,
    layers: int = 4,
    vacuum: float | None = 10.0,
    orthogonal: bool = False,
    rectangular: bool = False,
    symmetric: bool = False,
    termination: int = 0,
    size=(1, 1),
    layer_tol: float = LAYER_TOL,
    charges: dict[str, float] | None = None,
) -> Atoms:
    """A slab of the face ``miller`` of ``bulk`` in the primitive reduced surface cell.

    Parameters
    ----------
    bulk : ase.Atoms or str
        Bulk crystal in its conventional cell, or an element symbol (reference structure).
    miller : sequence of int
        (h k l), or (h k i l) for hexagonal crystals.
    layers : int
        Number of atomic layers (with ``symmetric=True`` the smallest count at least this
        large that gives a symmetric layer sequence).
    vacuum : float or None
        Thickness (Angstrom) of empty space between the top layer and the bottom layer of
        the periodic image, measured along the normal. ``None`` or 0 gives the bulk-periodic
        cell (c is a lattice vector; ``layers`` must then be a multiple of the layers per
        stacking period).
    orthogonal : bool
        Put c exactly along z (otherwise c keeps the in-plane part of the lattice stacking
        vector, reduced to its smallest value).
    rectangular : bool
        Use the rectangular (centred) cell where the surface lattice admits one (centred
        rectangular and hexagonal lattices: twice the primitive cell).
    symmetric : bool
        Same termination at the top and bottom (the sequence of layer compositions and
        spacings reads the same from either side).
    termination : int
        Index into :func:`terminations` of this face (0 for elements with one termination).
    size : int or (int, int)
        In-plane repetitions of the (primitive or rectangular) cell.
    layer_tol : float
        Height tolerance (Angstrom) for grouping atoms of one stacking period into a layer.
    charges : dict, optional
        Formal charges for the polarity of terminations (see :func:`terminations`).

    Returns
    -------
    ase.Atoms
        Cell rows a1, a2 in the xy-plane with a1 along +x and a1 x a2 along +z, +z out of the
        surface; c as described above; ``pbc = (True, True, True)`` so that DFT codes and
        ASE writers see a 3D-periodic cell with the vacuum inside it. Atoms are ordered
        from the bottom layer to the top layer; ``tags`` hold the layer number counted
        from the top (1 = top layer, ASE's convention). ``info["surfgeo"]`` holds the
        surface record (:mod:`surfgeo.slab.info`).

    Raises
    ------
    StructureError
        For impossible requests (see the messages).

    Examples
    --------
    >>> s = surface_slab("Pt", (1, 1, 1), layers=3, vacuum=10.0)
    >>> len(s), s.get_tags().tolist()
    (3, [3, 2, 1])
    """
    bulk_atoms = _as_bulk(bulk)
    face = face_geometry(bulk_atoms, miller, layer_tol)
    return slab_from_face(
        face, bulk_atoms, layers=layers, vacuum=vacuum, orthogonal=orthogonal, rectangular=rectangular,
        symmetric=symmetric, termination=termination, size=size, charges=charges,
    )


def rebase_face(face: Face, a1, a2) -> Face:
    """The same face with another in-plane basis (a1, a2: lattice vectors, slab frame, 2D).

    The frame is turned so that the new a1 lies along +x; a1 x a2 must point along +z and
    the two must span the primitive surface lattice.
    """
    A = face.cell2d
    a1 = np.asarray(a1, dtype=float)
    a2 = np.asarray(a2, dtype=float)
    T = np.array([a1, a2]) @ np.linalg.inv(A)
    if np.any(np.abs(T - np.rint(T)) > 1e-6) or round(float(np.linalg.det(T))) != 1:
        raise StructureError("the new surface basis must be a right-handed primitive basis of the lattice.")
    ang = math.atan2(a1[1], a1[0])
    c_, s_ = math.cos(-ang), math.sin(-ang)
    r2 = np.array([[c_, -s_], [s_, c_]])
    R3 = np.eye(3)
    R3[:2, :2] = r2
    newA = np.array([a1, a2]) @ r2.T
    newA[0, 1] = 0.0
    Sxy = face.stacking[:2] @ r2.T
    spar = _reduce_inplane(Sxy, newA)
    S = np.array([spar[0], spar[1], face.stacking[2]])
    # Cartesian basis positions (slab frame) -> new fractional coordinates
    cart = face.basis_frac @ face.stacking_matrix()
    cart = cart @ R3.T
    Bm = np.zeros((3, 3))
    Bm[:2, :2] = newA
    Bm[2] = S
    F = cart @ np.linalg.inv(Bm)
    F[:, :2] -= np.floor(F[:, :2])
    import dataclasses

    return dataclasses.replace(face, rotation=R3 @ face.rotation, cell2d=newA, stacking=S, basis_frac=F)


def slab_from_face(
    face: Face,
    bulk=None,
    layers: int = 4,
    vacuum: float | None = 10.0,
    orthogonal: bool = False,
    rectangular: bool = False,
    symmetric: bool = False,
    termination: int = 0,
    size=(1, 1),
    charges: dict[str, float] | None = None,
) -> Atoms:
    """Build a slab from a :class:`Face` (see :func:`surface_slab` for the parameters)."""
    bulk_atoms = bulk
    nlay = _check_int("layers", layers, 1, MAX_LAYERS)
    if vacuum is not None:
        vac = positive_number(vacuum, "vacuum", "thickness", zero_ok=True, error=StructureError)
        vacuum = vac if vac > 0 else None
    if isinstance(size, (int, np.integer)):
        size = (int(size), int(size))
    try:
        n1, n2 = (int(v) for v in size)
    except (TypeError, ValueError):
        raise StructureError(f"size must be two positive whole numbers, got {size!r}.") from None
    n1 = _check_int("size[0]", n1, 1, 10_000)
    n2 = _check_int("size[1]", n2, 1, 10_000)

    terms = terminations(face, charges=charges)
    tidx = _check_int("termination", termination, 0, 10**6)
    if tidx >= len(terms):
        raise StructureError(
            f"termination {termination} does not exist; this face has {len(terms)} distinct "
            f"termination(s), numbered 0 to {len(terms) - 1}."
        )
    top = terms[tidx]["top_group"]
    L = face.layers_per_period

    if symmetric:
        for extra in range(0, 2 * L + 1):
            if _palindromic(_signature(face, top, nlay + extra)):
                nlay += extra
                break
        else:
            raise StructureError(
                "no slab of this face with this termination reads the same from top and bottom; "
                "choose another termination or symmetric=False."
            )
    if vacuum is None and nlay % L:
        raise StructureError(
            f"a bulk-periodic cell (no vacuum) needs a multiple of {L} layers for this face, got {nlay}."
        )

    # ---- atoms of the 1x1 slab, bottom layer first
    order = np.argsort(face.basis_group, kind="stable")
    counts = np.bincount(face.basis_group, minlength=L)
    starts = np.concatenate([[0], np.cumsum(counts)[:-1]])
    ells = np.arange(nlay)[::-1]  # bottom layer first
    gi = (top - ells) % L
    kk = (top - ells - gi) // L
    sel = np.concatenate([order[starts[g]:starts[g] + counts[g]] for g in gi])
    kper = np.repeat(kk, counts[gi])
    tags = np.repeat(ells + 1, counts[gi])
    F = face.basis_frac[sel].copy()
    F[:, 2] += kper
    Bm = face.stacking_matrix()
    pos = F @ Bm
    # origin: the first atom of the top layer sits at x = y = 0
    pos[:, :2] -= pos[np.nonzero(tags == 1)[0][0], :2]
    sel_all = sel

    # ---- in-plane cell and supercell
    A = face.cell2d.copy()
    M = np.eye(2, dtype=int)
    rot2 = np.eye(2)
    if rectangular:
        M = _rectangular_matrix(A)
        b1 = M[0] @ A
        ang = math.atan2(b1[1], b1[0])
        c_, s_ = math.cos(-ang), math.sin(-ang)
        rot2 = np.array([[c_, -s_], [s_, c_]])
    M = np.diag([n1, n2]) @ M
    A = A @ rot2.T
    pos[:, :2] = pos[:, :2] @ rot2.T
    spar = face.stacking[:2] @ rot2.T
    B = M @ A
    pts = _lattice_points(M) @ A
    npts = len(pts)
    if npts > 1:
        full = pos[None, :, :].repeat(npts, axis=0)
        full[:, :, :2] += pts[:, None, :]
        # keep layer-major order: for each atom position in the unit (bottom first), all replicas
        pos = full.transpose(1, 0, 2).reshape(-1, 3)
        sel_all = np.repeat(sel_all, npts)
        tags = np.repeat(tags, npts)
        layer_order = np.argsort(-tags, kind="stable")
        pos, tags, sel_all = pos[layer_order], tags[layer_order], sel_all[layer_order]
    fr = pos[:, :2] @ np.linalg.inv(B)
    fr -= np.floor(fr + 1e-9)
    pos[:, :2] = fr @ B

    # ---- the third cell vector
    periods = -(-nlay // L)
    stack_par = _reduce_inplane(periods * spar, A)
    thickness = float(pos[:, 2].max() - pos[:, 2].min()) if len(pos) else 0.0
    if vacuum is None:
        cz = periods * face.plane_spacing
        if orthogonal and np.linalg.norm(stack_par) > 1e-6:
            fstack = spar @ np.linalg.inv(A)
            q = math.lcm(*[_rational(v, 1000).denominator for v in fstack])
            raise StructureError(
                f"this face has no bulk-periodic orthogonal cell with {nlay} layers; give a vacuum, "
                f"or use a multiple of {q * L} layers."
            )
    else:
        cz = thickness + vacuum
    cpar = np.zeros(2) if orthogonal else stack_par
    cell = np.zeros((3, 3))
    cell[:2, :2] = B
    cell[2] = [cpar[0], cpar[1], cz]
    pos[:, 2] += (cz - thickness) / 2.0 - pos[:, 2].min()
    _tag_values = np.arange(nlay, 0, -1)  # bottom layer first
    _first = np.searchsorted(-tags, -_tag_values)  # atoms are ordered by layer, bottom first
    _counts = np.diff(np.append(_first, len(tags)))
    _unit_heights = np.add.reduceat(pos[:, 2], _first) / _counts

    from ase.data import atomic_numbers

    znum = np.array([atomic_numbers[x] for x in face.basis_symbols])
    atoms = Atoms(numbers=znum[sel_all], positions=pos, cell=cell, pbc=(True, True, True))
    atoms.set_tags(tags)
    if vacuum is not None:
        # the bulk's own distances were checked when it was built; only a thin vacuum can bring
        # the top layer and the periodic image of the bottom layer closer than a sane minimum
        from ase.data import covalent_radii

        if vacuum < 2 * CONTACT_FACTOR * max(float(covalent_radii[z]) for z in set(znum.tolist())):
            check_distances(atoms, f"a vacuum of {vacuum:g} A",
                            "give a larger vacuum, or 0 for a bulk-periodic cell")

    term = dict(terms[tidx])
    term.pop("top_group", None)
    bulk_rec = {k: face.bulk.get(k) for k in ("formula", "structure", "a", "c", "spacegroup", "source")}
    prov = (
        f"surfgeo surface_slab: {face.bulk.get('formula')} {face.bulk.get('structure')} "
        f"a={face.bulk.get('a'):.6g}" + (f" c={face.bulk['c']:.6g}" if face.bulk.get("c") and
                                           face.bulk.get("structure") in ("hcp", "wurtzite") else "")
        + f" ({face.bulk.get('source')}), face ({miller_string(face.miller)}), {nlay} layers, "
        + (f"vacuum {vacuum:g} A" if vacuum is not None else "bulk-periodic cell")
        + f", termination {tidx}, cell {'rectangular' if rectangular else 'primitive'} "
        + f"{n1}x{n2}{', orthogonal c' if orthogonal else ''}"
    )
    from surfgeo.slab.steps import step_description

    step = step_description(face, bulk_atoms)
    if step is not None:
        for key in ("step_edge", "step_down"):
            step[key] = [float(v) for v in np.asarray(step[key]) @ rot2.T]
    info = SurfaceInfo(
        surface_cell=A,
        supercell_matrix=M,
        miller=list(face.miller),
        bulk=bulk_rec,
        layer_spacing=face.layer_spacing,
        provenance=[prov],
        step=step,
        termination=term,
        extra={
            "layers": nlay,
            "vacuum": vacuum,
            "layers_from_tags": True,
            "bulk_layer_spacings": [float(v) for v in face.layer_spacings],
            "plane_spacing": face.plane_spacing,
            "bulk_to_slab": (np.vstack([np.hstack([rot2, np.zeros((2, 1))]), [0, 0, 1]]) @ face.rotation),
            "symmetric": bool(symmetric),
            "ideal_layer_heights": [float(h) for h in _unit_heights],
        },
    )
    set_surface_info(atoms, info)
    return atoms


__all__ = [
    "MAX_LAYERS",
    "Face",
    "parse_miller",
    "miller_string",
    "face_geometry",
    "terminations",
    "default_charges",
    "surface_slab",
    "slab_from_face",
    "rebase_face",
]
